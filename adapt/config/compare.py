"""Config schema of the compare job."""

from __future__ import annotations

import math
import re
from dataclasses import dataclass, field

from adapt.config.common import RuntimeConfig, validate_runtime
from adapt.common.errors import Problems

TFIDF_ARM = "tfidf"
# test metrics every arm reports and the paired tests compare; the verdict uses significance.primary_metric
METRICS = ("accuracy", "macro_f1")
METRIC_NAMES = {"accuracy": "accuracy", "macro_f1": "macro-F1"}
SELECT_EPOCH = ("best_dev", "last")


@dataclass
class TaskConfig:
    # Folder with train/dev/test files (.jsonl, .csv or .tsv, optionally .gz) holding a text and a label field.
    dir: str = "???"
    text_field: str = "text"
    label_field: str = "label"
    # Tokens per example, including the special tokens; longer texts are truncated.
    max_seq_len: int = 64
    # A test split lacking one of the task's labels is refused (metrics average over every label); true scores
    # such a label as F1 = 0, with a warning.
    allow_missing_test_labels: bool = False
    # Further test sets, name -> file (relative to dir, or absolute; same fields and labels), e.g. another document
    # type or source: every arm is scored on each, and the domain-gap table sets the reference arm on test = 100.
    other_tests: dict[str, str] = field(default_factory=dict)
    # Splits a csv/tsv label cell into several labels (e.g. "|"), making the task multi-label; null = one label
    # per cell. (A jsonl label field holding a list makes a task multi-label without it.)
    label_delimiter: str | None = None


@dataclass
class FinetuneConfig:
    # Peak learning rate of AdamW, reached after the warmup and decayed linearly to 0.
    learning_rate: float = 1e-4
    epochs: int = 4
    batch_size: int = 16
    weight_decay: float = 0.01
    # Share of all optimizer steps spent warming the learning rate up linearly from 0.
    warmup_share: float = 0.1
    # Dropout applied to the mean-pooled vector before the linear head.
    dropout: float = 0.1
    # Gradient-norm clipping; 0 turns it off.
    max_grad_norm: float = 1.0
    # Which epoch's model is evaluated on test: "best_dev" (highest dev macro-F1, earliest on ties) or "last".
    select_epoch: str = "best_dev"


@dataclass
class SignificanceConfig:
    # Two-sided confidence level of every interval (per-arm t-intervals and paired bootstrap).
    confidence: float = 0.95
    # Paired bootstrap resamples of the test examples.
    bootstrap_resamples: int = 2000
    # Random sign flips of the paired permutation test (exact enumeration when 2^n_test is smaller).
    permutation_resamples: int = 5000
    # Seed of the resampling generator (independent of the fine-tuning seeds).
    seed: int = 0
    # Metric the verdict is based on: "macro_f1" or "accuracy".
    primary_metric: str = "macro_f1"
    # Fewer fine-tuning seeds than this add a caution to the verdict (Dodge et al. 2020).
    min_seeds: int = 5


@dataclass
class CompareJob:
    # Arm name -> checkpoint folder (or packaged:all-minilm-l6-v2, or a pretrain run folder holding final/).
    # Every arm gets the same classifier head initialisation and the same seeds.
    arms: dict[str, str] = field(default_factory=dict)
    # Run code shipped inside an arm's checkpoint (custom model classes); only for checkpoints you trust.
    trust_remote_code: bool = False
    # Arm every other fine-tuned arm is compared with in the paired tests.
    reference_arm: str = "base"
    task: TaskConfig = field(default_factory=TaskConfig)
    finetune: FinetuneConfig = field(default_factory=FinetuneConfig)
    seeds: list[int] = field(default_factory=lambda: [0, 1, 2, 3, 4])
    # Add a TF-IDF (word 1-2-grams) + logistic-regression arm named "tfidf"; it is deterministic, so it runs once.
    tfidf_baseline: bool = True
    # Inverse regularisation strengths tried for the TF-IDF arm; the best dev macro-F1 wins (smallest on ties).
    tfidf_c_values: list[float] = field(default_factory=lambda: [0.1, 1.0, 10.0, 100.0])
    significance: SignificanceConfig = field(default_factory=SignificanceConfig)
    # Shares of the training split to fine-tune on as well (a learning curve); 1.0 is the full run the verdict
    # uses. Each share is a class-stratified subset (at least one example per label) drawn once from
    # label_budget_seed; a smaller share's subset lies inside a larger one's, and every arm and seed gets the same.
    label_budgets: list[float] = field(default_factory=lambda: [1.0])
    label_budget_seed: int = 0
    # Arm -> its control arm (e.g. the same pretraining budget on general text): each arm is also tested against
    # its control, so "domain text helped" is told apart from "more pretraining helped".
    controls: dict[str, str] = field(default_factory=dict)
    out_dir: str = "runs/compare"
    runtime: RuntimeConfig = field(default_factory=RuntimeConfig)


def validate(cfg: CompareJob, p: Problems, prefix: str = "", arms_required: bool = True) -> None:
    k = (prefix + ".") if prefix else ""
    validate_runtime(cfg.runtime, f"{k}runtime", p)
    p.check(len(cfg.arms) >= 1 or not arms_required,
            f"{k}arms is empty; pass e.g. '+{k}arms.base=<folder>' '+{k}arms.adapted=<folder>'")
    if cfg.arms:
        p.check(cfg.reference_arm in cfg.arms,
                f"{k}reference_arm={cfg.reference_arm!r} is not one of the arms {sorted(cfg.arms)}; "
                f"set {k}reference_arm to the arm the others are compared with")
    for name, path in cfg.arms.items():
        p.check(bool(str(path or "").strip()), f"{k}arms.{name} is empty; give a checkpoint folder")
    p.check(not (cfg.tfidf_baseline and TFIDF_ARM in cfg.arms),
            f"{k}arms.{TFIDF_ARM}: the name is taken by the TF-IDF arm; rename the arm or set {k}tfidf_baseline=false")
    p.check(cfg.task.dir not in ("", "???"), f"{k}task.dir is not set; pass {k}task.dir=<folder with train/dev/test>")
    p.check(bool(cfg.task.text_field) and bool(cfg.task.label_field),
            f"{k}task.text_field and {k}task.label_field must be non-empty column names")
    p.check(len(cfg.seeds) >= 1 and len(set(cfg.seeds)) == len(cfg.seeds),
            f"{k}seeds={list(cfg.seeds)} must be a non-empty list of distinct integers; try {k}seeds=[0,1,2]")
    p.check(8 <= cfg.task.max_seq_len <= 8192,
            f"{k}task.max_seq_len={cfg.task.max_seq_len} is outside [8, 8192]; try {k}task.max_seq_len=64")
    _validate_finetune(cfg.finetune, f"{k}finetune", p)
    p.check(len(cfg.tfidf_c_values) >= 1 and all(c > 0 and math.isfinite(c) for c in cfg.tfidf_c_values),
            f"{k}tfidf_c_values={list(cfg.tfidf_c_values)} must be a non-empty list of positive numbers; "
            f"try {k}tfidf_c_values=[0.1,1,10,100]")
    _validate_significance(cfg.significance, f"{k}significance", p)
    budgets = list(cfg.label_budgets)
    p.check(bool(budgets) and all(0 < b <= 1 for b in budgets) and len(set(budgets)) == len(budgets)
            and 1.0 in budgets,
            f"{k}label_budgets={budgets} must be distinct shares in (0, 1] including 1.0; "
            f"try {k}label_budgets=[0.25,0.5,1.0]")
    for arm, control in cfg.controls.items():
        p.check(arm in cfg.arms and control in cfg.arms and arm != control,
                f"{k}controls.{arm}={control}: both must be fine-tuned arms and differ (arms: {sorted(cfg.arms)}); "
                f"e.g. {k}controls.adapted=general_control")
    delimiter = cfg.task.label_delimiter
    p.check(delimiter is None or bool(str(delimiter).strip()),
            f"{k}task.label_delimiter={delimiter!r} must be a non-blank string, or null for one label per cell; "
            f"e.g. {k}task.label_delimiter='|'")
    for name, path in cfg.task.other_tests.items():
        p.check(bool(str(path or "").strip()) and name != "test" and re.fullmatch(r"[\w-]+", name) is not None,
                f"{k}task.other_tests.{name}: give a file, under a name of letters, digits, _ or - other than 'test'")


def _validate_finetune(f: FinetuneConfig, k: str, p: Problems) -> None:
    p.check(f.learning_rate > 0, f"{k}.learning_rate={f.learning_rate} must be > 0; try {k}.learning_rate=1e-4")
    p.check(f.epochs >= 1, f"{k}.epochs={f.epochs} must be >= 1; try {k}.epochs=4")
    p.check(f.batch_size >= 1, f"{k}.batch_size={f.batch_size} must be >= 1; try {k}.batch_size=16")
    p.check(f.weight_decay >= 0, f"{k}.weight_decay={f.weight_decay} must be >= 0; try {k}.weight_decay=0.01")
    p.check(0 <= f.warmup_share < 1, f"{k}.warmup_share={f.warmup_share} is outside [0, 1); try {k}.warmup_share=0.1")
    p.check(0 <= f.dropout < 1, f"{k}.dropout={f.dropout} is outside [0, 1); try {k}.dropout=0.1")
    p.check(f.max_grad_norm >= 0, f"{k}.max_grad_norm={f.max_grad_norm} must be >= 0 (0 = no clipping)")
    p.check(f.select_epoch in SELECT_EPOCH,
            f"{k}.select_epoch={f.select_epoch!r} is not one of {', '.join(SELECT_EPOCH)}; "
            f"try {k}.select_epoch=best_dev")


def _validate_significance(s: SignificanceConfig, k: str, p: Problems) -> None:
    p.check(0.5 <= s.confidence < 1, f"{k}.confidence={s.confidence} is outside [0.5, 1); try {k}.confidence=0.95")
    p.check(s.bootstrap_resamples >= 100,
            f"{k}.bootstrap_resamples={s.bootstrap_resamples} is below 100; try {k}.bootstrap_resamples=2000")
    p.check(s.permutation_resamples >= 100,
            f"{k}.permutation_resamples={s.permutation_resamples} is below 100; try {k}.permutation_resamples=5000")
    p.check(s.primary_metric in METRICS,
            f"{k}.primary_metric={s.primary_metric!r} is not one of {', '.join(METRICS)}; "
            f"try {k}.primary_metric=macro_f1")
    p.check(s.min_seeds >= 1, f"{k}.min_seeds={s.min_seeds} must be >= 1; try {k}.min_seeds=5")
