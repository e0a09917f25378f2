"""Paired comparison of two checkpoints' pseudo-perplexity on the same documents.

Both ``scores.json`` files keep per-document pseudo-log-likelihoods (``per_document``: id, tokens, pll, and the
prepared corpus's duplicate ``cluster`` when it has one). On the documents both scored with the same token count,
the ratio a / b of the micro-averaged pseudo-perplexity exp(-ΣPLL / ΣT) (Salazar et al. 2020) is resampled with
replacement (percentile bootstrap): documents, not tokens, are the independent units; when the corpus kept
duplicates (several scored documents share a cluster), whole clusters are (a cluster bootstrap: copies of one text
are not independent evidence). The ratio is only meaningful when both used the same tokenizer, variant, window
length and stride; otherwise the pair is refused with the reason.
"""

from __future__ import annotations

import math
from typing import Any

import numpy as np


_CHUNK = 256  # resamples drawn at a time, so memory stays at _CHUNK × documents


def comparable(a: dict, b: dict) -> str:
    """Empty when the two score results may be compared; else why not."""
    for key, what in (("tokenizer_vocab_sha256", "tokenizers"), ("variant", "scoring variants"),
                      ("max_seq_len", "window lengths")):
        if a.get(key) is None or b.get(key) is None:
            return f"{key} is missing from one of the scores.json files"
        if a.get(key) != b.get(key):
            return f"different {what} ({key} {a.get(key)!s:.12} vs {b.get(key)!s:.12})"
    if a.get("window_stride") != b.get("window_stride"):  # absent from files written before strided windows
        return f"different window strides (window_stride {a.get('window_stride')} vs {b.get('window_stride')})"
    return ""


def _number(value: Any) -> float | None:
    if isinstance(value, bool) or not isinstance(value, (int, float)) or not math.isfinite(value):
        return None
    return float(value)


def matched_documents(a: dict, b: dict) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
    """(pll_a, pll_b, tokens, unit) of the documents both scored with the same number of tokens, in a's order;
    ``unit`` numbers the resampling units (a's duplicate cluster where recorded, else one per document)."""
    by_id = {}
    for d in b.get("per_document") or []:
        if isinstance(d, dict) and "id" in d:
            by_id[str(d["id"])] = d
    pll_a, pll_b, tokens, units = [], [], [], {}
    unit = []
    for d in a.get("per_document") or []:
        other = by_id.get(str(d.get("id"))) if isinstance(d, dict) else None
        if other is None or d.get("tokens") != other.get("tokens") or not _number(d.get("tokens")):
            continue
        if _number(d.get("pll")) is None or _number(other.get("pll")) is None:
            continue
        pll_a.append(float(d["pll"]))
        pll_b.append(float(other["pll"]))
        tokens.append(int(d["tokens"]))
        key = ("cluster", d["cluster"]) if d.get("cluster") is not None else ("doc", len(unit))
        unit.append(units.setdefault(key, len(units)))
    return (np.asarray(pll_a), np.asarray(pll_b), np.asarray(tokens, dtype=np.int64),
            np.asarray(unit, dtype=np.int64))


def pppl_ratio(pll_a: np.ndarray, pll_b: np.ndarray, tokens: np.ndarray) -> float:
    """exp(-ΣPLL_a/ΣT) / exp(-ΣPLL_b/ΣT): below 1 means checkpoint a is better on these documents."""
    total = tokens.sum()
    return math.exp(-(pll_a.sum() - pll_b.sum()) / total)


def paired_ratio(a: dict, b: dict, bootstrap_resamples: int, confidence: float, seed: int) -> dict[str, Any]:
    """Ratio of a's to b's pseudo-perplexity on their common documents, with a paired percentile bootstrap CI."""
    why = comparable(a, b)
    if why:
        return {"comparable": False, "reason": why}
    pll_a, pll_b, tokens, unit = matched_documents(a, b)
    n = len(tokens)
    if n == 0:
        return {"comparable": False, "reason": "the two runs scored no document in common (same id and tokens)"}
    # per resampling unit: PLL gain of a over b (nats) and tokens; a unit is a document or a duplicate cluster
    diff = np.bincount(unit, weights=pll_a - pll_b)
    unit_tokens = np.bincount(unit, weights=tokens)
    m = len(diff)
    out: dict[str, Any] = {"comparable": True, "ratio": pppl_ratio(pll_a, pll_b, tokens), "n_docs": n,
                           "n_tokens": int(tokens.sum()), "confidence": confidence,
                           "bootstrap_resamples": bootstrap_resamples,
                           "resampling_unit": "duplicate clusters" if m < n else "documents", "n_units": m,
                           "ci_low": None, "ci_high": None, "share_ratio_below_1": None}
    if bootstrap_resamples == 0:
        return out
    rng = np.random.default_rng(seed)
    ratios = np.empty(bootstrap_resamples)
    for start in range(0, bootstrap_resamples, _CHUNK):
        size = min(_CHUNK, bootstrap_resamples - start)
        idx = rng.integers(0, m, size=(size, m))  # (R, m) units drawn with replacement
        ratios[start:start + size] = np.exp(-diff[idx].sum(axis=1) / unit_tokens[idx].sum(axis=1))
    alpha = (1.0 - confidence) / 2.0
    out["ci_low"], out["ci_high"] = (float(v) for v in np.quantile(ratios, [alpha, 1.0 - alpha]))
    out["share_ratio_below_1"] = float(np.mean(ratios < 1.0))
    return out
