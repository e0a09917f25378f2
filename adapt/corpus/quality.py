"""Document quality score in [0, 1]: a small scikit-learn classifier trained on a gold set, or a heuristic.

The classifier sees hashed word unigrams and bigrams plus a few shape features (markup share, digit share,
mean word length, stop-word share, line-length statistics, repeated lines, vocabulary variety). Its accuracy is
estimated by stratified cross-validation and reported next to the majority-class baseline, so a gold set too
small to learn from shows up as "no better than guessing". Without a gold set a transparent rule score is used:
the share of simple rules a document passes.
"""

from __future__ import annotations

import logging
import math
import re
from collections import Counter
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np
from sklearn.dummy import DummyClassifier
from sklearn.feature_extraction.text import HashingVectorizer
from sklearn.linear_model import LogisticRegression
from sklearn.model_selection import StratifiedKFold, cross_val_score
from sklearn.pipeline import FeatureUnion, Pipeline
from sklearn.preprocessing import FunctionTransformer, StandardScaler
from threadpoolctl import threadpool_limits

from adapt.config.prepare import QualityConfig
from adapt.contracts.labelled_task import FORMAT_NAMES, read_labelled_file
from adapt.corpus.cleaning import normalise_text
from adapt.corpus.stopwords import STOPWORDS
from adapt.common.errors import InputError

log = logging.getLogger(__name__)

TERMINAL = tuple('.!?:;")»”')
FEATURE_NAMES = ["markup_share", "digit_share", "upper_share", "punct_share", "mean_word_len", "stopword_share",
                 "log_words", "mean_line_chars", "std_line_chars", "short_line_share", "terminal_line_share",
                 "repeated_line_share", "type_token_ratio", "top_word_share", "non_alpha_word_share"]
LABELS = {"good": 1, "poor": 0}


WORD_RE = re.compile(r"[^\W_]+(?:['’][^\W_]+)*")  # words without surrounding punctuation
LETTER_TOKEN_RE = re.compile(r"\S*[^\W\d_]\S*")  # whitespace tokens holding at least one letter


def shape_features(text: str, markup_share: float, language: str) -> np.ndarray:
    """The shape features of one cleaned document, in FEATURE_NAMES order (C-speed passes where possible)."""
    stop = STOPWORDS[language]
    chars = Counter(text)  # character classes from the distinct characters
    visible = max(len(text) - chars[" "] - chars["\n"], 1)
    letters = sum(n for c, n in chars.items() if c.isalpha()) or 1
    tokens = text.split()
    n = max(len(tokens), 1)
    words = WORD_RE.findall(text.lower())
    n_words = max(len(words), 1)
    lines = [ln for ln in text.split("\n") if ln.strip()] or [""]
    lens = np.fromiter(map(len, lines), dtype=float, count=len(lines))
    counts = Counter(words)
    n_stop = sum(counts[w] for w in stop if w in counts)
    for w in stop:
        counts.pop(w, None)
    head = words[:500]  # type-token ratio on a fixed-size prefix so that it does not fall with length alone
    return np.array([
        markup_share,
        sum(n for c, n in chars.items() if c.isdigit()) / visible,
        sum(n for c, n in chars.items() if c.isupper()) / letters,
        sum(n for c, n in chars.items() if not c.isalnum() and not c.isspace()) / visible,
        sum(map(len, tokens)) / n,
        n_stop / n_words,
        math.log1p(len(tokens)),
        float(lens.mean()),
        float(lens.std()),
        sum(ln.count(" ") < 4 for ln in lines) / len(lines),
        sum(ln.rstrip().endswith(TERMINAL) for ln in lines) / len(lines),
        1.0 - len(set(lines)) / len(lines),
        len(set(head)) / max(len(head), 1),
        (counts.most_common(1)[0][1] / n_words) if counts else 0.0,
        1.0 - len(LETTER_TOKEN_RE.findall(text)) / n,
    ])


def _texts(records: list[tuple[str, float]]) -> list[str]:
    return [t for t, _ in records]


def _shape_matrix(records: list[tuple[str, float]], language: str) -> np.ndarray:
    return np.vstack([shape_features(t, m, language) for t, m in records])


def build_classifier(language: str, hash_features_log2: int, seed: int) -> Pipeline:
    words = Pipeline([("text", FunctionTransformer(_texts)),
                      ("hash", HashingVectorizer(n_features=2 ** hash_features_log2, ngram_range=(1, 2),
                                                 alternate_sign=False, norm="l2"))])
    shape = Pipeline([("shape", FunctionTransformer(_shape_matrix, kw_args={"language": language})),
                      ("scale", StandardScaler())])
    return Pipeline([("features", FeatureUnion([("words", words), ("shape", shape)])),
                     ("clf", LogisticRegression(C=1.0, solver="liblinear", class_weight="balanced",
                                                random_state=seed))])


# Heuristic rules (common practice in corpus filtering; thresholds are ours): (feature, low, high).
HEURISTIC_RULES = [("mean_word_len", 3.0, 10.0), ("stopword_share", 0.15, 1.0), ("digit_share", 0.0, 0.2),
                   ("markup_share", 0.0, 0.2), ("repeated_line_share", 0.0, 0.3), ("top_word_share", 0.0, 0.08),
                   ("type_token_ratio", 0.2, 1.0), ("terminal_line_share", 0.3, 1.0),
                   ("non_alpha_word_share", 0.0, 0.3)]


@dataclass
class QualityModel:
    """Scores documents; ``kind`` is "classifier" or "heuristic". ``report`` goes into the profile."""

    kind: str
    language: str
    pipeline_: Pipeline | None = None
    report: dict = field(default_factory=dict)

    def score(self, records: list[tuple[str, float]]) -> np.ndarray:
        """Probability of "good" (classifier) or share of rules passed (heuristic), one per (text, markup_share)."""
        if not records:
            return np.empty(0)
        if self.pipeline_ is not None:
            good = list(self.pipeline_.classes_).index(1)
            with threadpool_limits(limits=1):  # a small model: BLAS threads only contend with the workers
                return self.pipeline_.predict_proba(records)[:, good]
        idx = [FEATURE_NAMES.index(name) for name, _, _ in HEURISTIC_RULES]
        lo = np.array([r[1] for r in HEURISTIC_RULES])
        hi = np.array([r[2] for r in HEURISTIC_RULES])
        feats = _shape_matrix(records, self.language)[:, idx]
        return ((feats >= lo) & (feats <= hi)).mean(axis=1)


def heuristic_model(language: str) -> QualityModel:
    rules = [f"{lo:g} <= {name} <= {hi:g}" for name, lo, hi in HEURISTIC_RULES]
    return QualityModel("heuristic", language, None, {"kind": "heuristic", "rules": rules,
                                                      "note": "no gold set given: score = share of rules passed"})


def load_gold(path: Path, cfg: QualityConfig) -> tuple[list[tuple[str, float]], np.ndarray]:
    if not path.is_file():
        raise InputError(f"quality.gold_path={path}: file not found; give a {FORMAT_NAMES} gold set with "
                         f"{cfg.text_field} and {cfg.label_field} (good/poor), or quality.gold_path=null "
                         "for the heuristic score")  # also checked before any work by prepare.run
    rows = read_labelled_file(path, cfg.text_field, cfg.label_field, key_prefix="quality")
    bad = sorted({r.label for r in rows} - set(LABELS))
    if bad:
        raise InputError(f"quality.gold_path={path}: labels {bad[:5]} are not good/poor; relabel them "
                         f"or set quality.label_field to the right field")
    records = []
    for r in rows:
        cleaned = normalise_text(r.text)
        records.append((cleaned.text, cleaned.markup_share))
    return records, np.array([LABELS[r.label] for r in rows])


def train_quality_model(path: Path, cfg: QualityConfig, language: str, seed: int) -> QualityModel:
    """Fit the classifier on the whole gold set after estimating its accuracy by cross-validation."""
    records, y = load_gold(path, cfg)
    counts = {name: int((y == v).sum()) for name, v in LABELS.items()}
    if min(counts.values()) < cfg.cv_folds:
        raise InputError(f"quality.gold_path={path}: needs at least quality.cv_folds={cfg.cv_folds} examples of "
                         f"each label; found {counts}; add examples or lower quality.cv_folds")
    folds = StratifiedKFold(n_splits=cfg.cv_folds, shuffle=True, random_state=seed)
    model = build_classifier(language, cfg.hash_features_log2, seed)
    # One BLAS thread: multi-threaded BLAS made this small fit 50x slower on a busy 2-core machine.
    with threadpool_limits(limits=1):
        acc = cross_val_score(model, records, y, cv=folds, scoring="accuracy")
        base = cross_val_score(DummyClassifier(strategy="most_frequent"), records, y, cv=folds, scoring="accuracy")
        model.fit(records, y)
    report = {"kind": "classifier", "gold_path": str(path), "gold_counts": counts, "cv_folds": cfg.cv_folds,
              "cv_accuracy": float(acc.mean()), "cv_accuracy_std": float(acc.std()),
              "majority_baseline_accuracy": float(base.mean()),
              "beats_baseline": bool(acc.mean() > base.mean())}
    if not report["beats_baseline"]:
        log.warning("quality classifier (CV accuracy %.3f) does not beat the majority baseline (%.3f): "
                    "its scores are not informative; add gold examples or use quality.gold_path=null",
                    acc.mean(), base.mean())
    return QualityModel("classifier", language, model, report)
