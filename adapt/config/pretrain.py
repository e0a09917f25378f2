"""Config schema of the pretrain job."""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Optional

from adapt.config.common import (EncoderConfig, MaskingConfig, RuntimeConfig, optional_str, validate_encoder,
                                 validate_masking, validate_runtime)
from adapt.common.errors import Problems


@dataclass
class ScheduleConfig:
    learning_rate: float = 5e-5
    weight_decay: float = 0.01
    # Optimizer steps; one step = grad_accum_steps micro-steps of batch_size sequences (per process).
    max_steps: int = 200
    batch_size: int = 16
    grad_accum_steps: int = 1
    warmup_steps: int = 20
    # Learning-rate shape after warmup: linear, cosine or constant.
    decay: str = "linear"
    max_grad_norm: float = 1.0
    # Stop cleanly (with a checkpoint) after this many steps although the schedule runs to max_steps;
    # for time-boxed allocations. Resume with resume=auto. null = run to the end.
    stop_after_steps: Optional[int] = None


@dataclass
class HeadWarmupConfig:
    # auto: warm up only when the MLM head is missing or partial; always; never.
    when: str = "auto"
    # The frozen encoder runs once over this many seeded training sequences (masked as in training); the head is
    # then fit on the cached hidden states at their masked positions.
    sample_seqs: int = 768
    # Share of those sequences held out: the fit stops on their loss.
    heldout_share: float = 0.15
    # Most epochs over the cached training positions (one epoch = one window of the stopping rule).
    max_epochs: int = 40
    # Measured on the packaged encoder (benchmarks/head_warmup.py): 768 sequences at 1e-2 reach a lower held-out
    # loss than 200 full-model steps; 1024 at 3e-3 and 256 at 1e-3 stop higher.
    learning_rate: float = 1e-2
    # Cached masked positions per AdamW step.
    batch_size: int = 256
    # Stop once two epochs in a row improve the held-out loss by less than this share (0 = run max_epochs).
    # A half-trained head makes the base look worse than it is. On the packaged encoder (benchmarks/head_warmup.py)
    # 0.002 ran 8 epochs to a held-out loss of 6.051, 0.004 stops after 5 at about 6.07 in five eighths of the time.
    min_improvement: float = 0.004


# The training variants of the registry in adapt.training.adapters (a contract test keeps the two equal; the
# names live here so that validating a config imports nothing heavier than omegaconf).
ADAPTER_KINDS = ("full", "lora", "embeddings", "top_layers")


@dataclass
class AdapterConfig:
    # Training variant: one of ADAPTER_KINDS.
    kind: str = "full"
    # LoRA rank, scaling numerator and dropout (Hu et al. 2021).
    r: int = 8
    alpha: int = 16
    dropout: float = 0.0
    target_modules: list[str] = field(default_factory=lambda: ["query", "key", "value"])
    # top_layers: how many of the highest encoder layers to train.
    num_top_layers: int = 2


# The adapter settings each training variant uses: only these (and adapter.kind) are part of a run's fingerprint.
ADAPTER_SETTINGS = {"full": (), "embeddings": (), "top_layers": ("num_top_layers",),
                    "lora": ("r", "alpha", "dropout", "target_modules")}


@dataclass
class EvalConfig:
    # Cheap held-out MLM loss with a fixed mask every N steps (0 = only at start and end).
    every_steps: int = 50
    # Held-out sequences used for that loss.
    max_heldout_seqs: int = 64
    # Exact pseudo-perplexity at start and end on at most this many held-out tokens (0 = skip).
    pppl_max_tokens: int = 2000
    pppl_batch_size: int = 64


@dataclass
class EarlyStopConfig:
    # Stop once this many held-out evaluations in a row (every eval.every_steps steps) bring the domain held-out
    # loss no lower than the best so far minus min_improvement; the run is then complete (final/ and best/ are
    # written). null = off: the run goes to schedule.max_steps, as a fixed schedule should unless asked otherwise.
    patience: Optional[int] = None
    # Smallest fall of the domain held-out loss (nats, absolute) that counts as an improvement and makes that
    # step the best one (0 = any fall).
    min_improvement: float = 0.0


@dataclass
class CheckpointConfig:
    # Save the full training state every N steps (0 = only at the end or on interruption).
    save_every_steps: int = 100
    # Keep the newest N checkpoints (the best one is kept besides them while it is tracked).
    keep_last: int = 2
    # Track the best step (lowest domain held-out loss at the evaluations), keep its checkpoint out of rotation
    # and export it as best/. Always on while early_stop.patience is set; needs eval.every_steps > 0.
    keep_best: bool = False


@dataclass
class CardConfig:
    # Licence of the trained weights written into the model cards' front-matter (an SPDX id such as apache-2.0,
    # or "other"); it must allow what the starting encoder's and the corpus's licences allow. null = "unknown",
    # with a note to set it before sharing.
    license: Optional[str] = None


@dataclass
class DataConfig:
    # Folder for the token cache (each split tokenised and packed once, memory-mapped by every process and on
    # every resume); shareable between runs on the same corpus. null = <out_dir>/token_cache.
    cache_dir: Optional[str] = None
    # Order of the training sequences in each epoch: shuffled; quality_desc (highest prepare quality score first,
    # shuffled within windows of window_batches global batches); quality_weighted (drawn with replacement, weight
    # max(score, quality_floor)). The quality orders need the quality column adapt-prepare writes.
    order: str = "shuffled"
    window_batches: int = 8
    # quality_weighted: the smallest draw weight (scores are in [0, 1]), so low-scored text is still seen.
    quality_floor: float = 0.1


DATA_ORDERS = ("shuffled", "quality_desc", "quality_weighted")


@dataclass
class ReplayConfig:
    # Share of every batch drawn from general_dir's train split (its own shuffled, resumable order) to limit
    # forgetting; Ibrahim et al. 2024 use a few percent up to 25%. 0 = off.
    share: float = 0.0


MAX_REPLAY_SHARE = 0.5


@dataclass
class PretrainEncoderConfig(EncoderConfig):
    # Dropout on the attention probabilities while pretraining (BERT: attention_probs_dropout_prob), in [0, 1);
    # null = the checkpoint's own. 0 lets CPU attention take its fused path (benchmarks/README.md,
    # pretrain_speed.py). Exported folders keep the checkpoint's own value, so fine-tuning is the same for all arms.
    attention_dropout: Optional[float] = None


@dataclass
class PretrainJob:
    # Prepared corpus folder (output of the prepare job: train/ and heldout/ Parquet shards).
    corpus_dir: str = "???"
    # Optional prepared general-text corpus; its held-out loss and pseudo-perplexity measure forgetting.
    general_dir: Optional[str] = None
    out_dir: str = "runs/pretrain"
    seed: int = 0
    # auto: continue from the newest checkpoint in out_dir if there is one; never: refuse an existing run;
    # or a path to a checkpoint folder.
    resume: str = "auto"
    data: DataConfig = field(default_factory=DataConfig)
    replay: ReplayConfig = field(default_factory=ReplayConfig)
    encoder: PretrainEncoderConfig = field(default_factory=PretrainEncoderConfig)
    masking: MaskingConfig = field(default_factory=MaskingConfig)
    schedule: ScheduleConfig = field(default_factory=ScheduleConfig)
    head_warmup: HeadWarmupConfig = field(default_factory=HeadWarmupConfig)
    adapter: AdapterConfig = field(default_factory=AdapterConfig)
    eval: EvalConfig = field(default_factory=EvalConfig)
    checkpoint: CheckpointConfig = field(default_factory=CheckpointConfig)
    early_stop: EarlyStopConfig = field(default_factory=EarlyStopConfig)
    card: CardConfig = field(default_factory=CardConfig)
    runtime: RuntimeConfig = field(default_factory=RuntimeConfig)


# Keys that may change when a run is resumed; every other key (and the content of the encoder, tokenizer and
# corpus) is part of the run's fingerprint, recorded in each checkpoint and compared on resume. Locations are
# free to change because their content is compared instead; these keys change where and how the run goes on, not
# what it computes (device and precision change its numerics, not its definition).
RESUME_SAFE_KEYS = (
    "out_dir", "resume", "corpus_dir", "general_dir", "encoder.name_or_path", "encoder.trust_remote_code",
    "data.cache_dir", "schedule.stop_after_steps", "eval.every_steps", "eval.pppl_batch_size",
    "checkpoint.save_every_steps", "checkpoint.keep_last", "card.license",
    "runtime.device", "runtime.precision", "runtime.num_threads", "runtime.progress",
)


def validate(cfg: PretrainJob, p: Problems, prefix: str = "") -> None:
    k = (prefix + ".") if prefix else ""
    p.check(cfg.corpus_dir not in ("", "???"), f"{k}corpus_dir is not set; pass {k}corpus_dir=<prepared folder>")
    validate_encoder(cfg.encoder, f"{k}encoder", p)
    ad = cfg.encoder.attention_dropout
    p.check(ad is None or 0 <= ad < 1, f"{k}encoder.attention_dropout={ad} is outside [0, 1); try "
            f"{k}encoder.attention_dropout=0, or null for the checkpoint's own value")
    validate_masking(cfg.masking, f"{k}masking", p)
    validate_runtime(cfg.runtime, f"{k}runtime", p)
    s = cfg.schedule
    p.check(s.learning_rate > 0, f"{k}schedule.learning_rate={s.learning_rate} must be > 0; try 5e-5")
    p.check(s.max_steps >= 1, f"{k}schedule.max_steps={s.max_steps} must be >= 1")
    p.check(s.batch_size >= 1, f"{k}schedule.batch_size={s.batch_size} must be >= 1")
    p.check(s.grad_accum_steps >= 1, f"{k}schedule.grad_accum_steps={s.grad_accum_steps} must be >= 1")
    p.check(0 <= s.warmup_steps <= s.max_steps,
            f"{k}schedule.warmup_steps={s.warmup_steps} must be within [0, max_steps={s.max_steps}]")
    p.check(s.decay in ("linear", "cosine", "constant"),
            f"{k}schedule.decay={s.decay!r} is not one of linear, cosine, constant")
    p.check(s.max_grad_norm >= 0, f"{k}schedule.max_grad_norm={s.max_grad_norm} must be >= 0 (0 = no clipping)")
    p.check(s.stop_after_steps is None or 1 <= s.stop_after_steps <= s.max_steps,
            f"{k}schedule.stop_after_steps={s.stop_after_steps} must be within [1, max_steps] or null")
    h = cfg.head_warmup
    p.check(h.when in ("auto", "always", "never"),
            f"{k}head_warmup.when={h.when!r} is not one of auto, always, never")
    p.check(h.sample_seqs >= 2 and h.max_epochs >= 1 and h.batch_size >= 1 and h.learning_rate > 0,
            f"{k}head_warmup needs sample_seqs >= 2, max_epochs >= 1, batch_size >= 1, learning_rate > 0 (got "
            f"{h.sample_seqs}, {h.max_epochs}, {h.batch_size}, {h.learning_rate}); set head_warmup.when=never to skip it")
    p.check(0 < h.heldout_share < 1 and 0 <= h.min_improvement < 1,
            f"{k}head_warmup needs 0 < heldout_share < 1 and 0 <= min_improvement < 1 "
            f"(got {h.heldout_share}, {h.min_improvement}); try heldout_share=0.15 min_improvement=0.01")
    a = cfg.adapter
    p.check(a.kind in ADAPTER_KINDS, f"{k}adapter.kind={a.kind!r} is not one of {', '.join(ADAPTER_KINDS)}; "
            "try adapter.kind=full")
    p.check(a.r >= 1 and a.alpha >= 1 and 0 <= a.dropout < 1,
            f"{k}adapter needs r >= 1, alpha >= 1, 0 <= dropout < 1 (got r={a.r}, alpha={a.alpha}, dropout={a.dropout})")
    p.check(a.num_top_layers >= 1, f"{k}adapter.num_top_layers={a.num_top_layers} must be >= 1")
    e = cfg.eval
    p.check(e.every_steps >= 0 and e.max_heldout_seqs >= 1 and e.pppl_max_tokens >= 0 and e.pppl_batch_size >= 1,
            f"{k}eval needs every_steps >= 0, max_heldout_seqs >= 1, pppl_max_tokens >= 0, pppl_batch_size >= 1")
    c = cfg.checkpoint
    p.check(c.save_every_steps >= 0, f"{k}checkpoint.save_every_steps={c.save_every_steps} must be >= 0")
    p.check(c.keep_last >= 1, f"{k}checkpoint.keep_last={c.keep_last} must be >= 1")
    es = cfg.early_stop
    p.check(es.patience is None or es.patience >= 1,
            f"{k}early_stop.patience={es.patience} must be >= 1 (evaluations) or null (off); try 3")
    p.check(es.min_improvement >= 0,
            f"{k}early_stop.min_improvement={es.min_improvement} must be >= 0 (nats); try 0.01")
    p.check(not tracks_best(cfg) or e.every_steps >= 1,
            f"{k}early_stop.patience / {k}checkpoint.keep_best need held-out evaluations during the run, but "
            f"{k}eval.every_steps=0; set {k}eval.every_steps=50 (or another step count)")
    p.check(cfg.card.license is None or (isinstance(cfg.card.license, str) and cfg.card.license.strip() != ""
                                         and "\n" not in cfg.card.license),
            f"{k}card.license={cfg.card.license!r} must be one line (an SPDX id such as apache-2.0) or null")
    p.check(cfg.resume not in ("",), f"{k}resume is empty; use auto, never or a checkpoint folder")
    d = cfg.data
    p.check(d.order in DATA_ORDERS, f"{k}data.order={d.order!r} is not one of {', '.join(DATA_ORDERS)}; "
            f"try {k}data.order=shuffled")
    p.check(d.window_batches >= 1, f"{k}data.window_batches={d.window_batches} must be >= 1; try 8")
    p.check(0 < d.quality_floor <= 1, f"{k}data.quality_floor={d.quality_floor} is outside (0, 1]; try 0.1")
    r = cfg.replay
    p.check(0 <= r.share <= MAX_REPLAY_SHARE,
            f"{k}replay.share={r.share} is outside [0, {MAX_REPLAY_SHARE}]; try {k}replay.share=0.1")
    p.check(r.share == 0 or optional_str(cfg.general_dir) is not None,
            f"{k}replay.share={r.share} needs {k}general_dir (a prepared general-text corpus to replay); "
            f"set {k}general_dir=<prepared folder> or {k}replay.share=0")


def tracks_best(cfg: PretrainJob) -> bool:
    """Whether the run keeps its best step (checkpoint out of rotation, best/ exported)."""
    return cfg.early_stop.patience is not None or cfg.checkpoint.keep_best
