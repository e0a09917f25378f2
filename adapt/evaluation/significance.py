"""Statistics for comparing fine-tuned arms: seed summaries, the seed-aware primary test, secondary paired tests
over test examples, Holm's correction over arms, verdict wording.

Predictions come as integer arrays of shape (S, n): S fine-tuning seeds × n test examples, the same seeds and
examples for both arms, so every test is paired (Dror et al. 2018 recommend paired tests for this setting). A
multi-label task gives binary indicator arrays instead: gold (n, C) and predictions (S, n, C) over the task's C
labels (``indicator_matrix``); accuracy is then exact-match (subset) accuracy and an example is "correct" when
its whole label set is, while macro-F1 counts true/false positives per label as before.

- ``summarize``: mean, sd and a t-interval over seeds (seed-to-seed spread; Dodge et al. 2020).
- ``seed_aware_difference``: the primary test, its variance from seeds and from test examples (see there).
- ``paired_bootstrap``: resample test examples with replacement; per resample average each arm's metric over
  seeds and take the difference -> percentile CI and one-sided p-values (Berg-Kirkpatrick et al. 2012, §2:
  p = share of resampled differences at least twice the observed one).
- ``paired_permutation``: swap the two arms' predictions of an example (a sign flip of its paired difference);
  exact when 2^n is not larger than the number of resamples. For accuracy this is the sign-flip test on
  per-example correctness pooled over seeds.
- ``mcnemar_exact``: exact binomial McNemar test on the discordant pairs.

Macro-F1 follows scikit-learn's ``f1_score(labels=<the task's labels>, average="macro", zero_division=0)``: the
mean over the task's fixed label set, so every arm is averaged over the same labels. The secondary tests keep the
seeds fixed: they measure test-set sampling only.
"""

from __future__ import annotations

import itertools
import math
from collections import Counter
from typing import Optional

import numpy as np
from scipy import stats

from adapt.config.compare import METRIC_NAMES, METRICS

_CHUNK = 256  # resamples per matrix product, to bound memory on large test sets


def summarize(values: list[float] | np.ndarray, confidence: float = 0.95,
              bounds: Optional[tuple[float, float]] = None) -> dict[str, Optional[float]]:
    """Mean, sample sd (ddof=1) and a two-sided t-interval of the mean; sd and CI are None for one value.

    ``bounds`` clips the interval to the metric's range (a t-interval of few values can leave [0, 1]).
    """
    x = np.asarray(values, dtype=float)
    if x.size == 0:
        raise ValueError("summarize needs at least one value")
    mean = float(x.mean())
    if x.size < 2:
        return {"n": 1, "mean": mean, "sd": None, "ci_low": None, "ci_high": None}
    sd = float(x.std(ddof=1))
    half = float(stats.t.ppf((1 + confidence) / 2, df=x.size - 1)) * sd / math.sqrt(x.size)
    low, high = mean - half, mean + half
    if bounds is not None:
        low, high = max(low, bounds[0]), min(high, bounds[1])
    return {"n": int(x.size), "mean": mean, "sd": sd, "ci_low": low, "ci_high": high}


def _as_runs(preds: np.ndarray | list, n: int) -> np.ndarray:
    p = np.asarray(preds, dtype=np.int64)
    p = p[None, :] if p.ndim == 1 else p
    if p.ndim != 2 or p.shape[1] != n:
        raise ValueError(f"predictions must have shape (seeds, {n}); got {p.shape}")
    return p


def indicator_matrix(label_ids: list[list[int]], n_classes: int) -> np.ndarray:
    """(n, C) 0/1 matrix of per-example label-id lists (a multi-label task's gold or one seed's predictions)."""
    out = np.zeros((len(label_ids), n_classes), dtype=np.int64)
    for i, ids in enumerate(label_ids):
        out[i, list(ids)] = 1
    return out


def _as_matrix_runs(preds: np.ndarray | list, n: int, c: int) -> np.ndarray:
    p = np.asarray(preds, dtype=np.int64)
    p = p[None] if p.ndim == 2 else p
    if p.ndim != 3 or p.shape[1:] != (n, c) or not np.isin(p, (0, 1)).all():
        raise ValueError(f"multi-label predictions must be 0/1 arrays of shape (seeds, {n}, {c}); got {p.shape}")
    return p


def _indicators(gold: np.ndarray, pred: np.ndarray, n_classes: int) -> tuple[np.ndarray, ...]:
    """Per-example one-hot true positives, false positives, false negatives: each (n, C) float; from label ids
    (n,), or from the 0/1 indicator matrices (n, C) of a multi-label task."""
    g = gold.astype(float) if gold.ndim == 2 else np.eye(n_classes)[gold]
    q = pred.astype(float) if gold.ndim == 2 else np.eye(n_classes)[pred]
    tp = g * q
    return tp, q - tp, g - tp


def _with_correct(gold: np.ndarray, pred: np.ndarray, n_classes: int) -> tuple[np.ndarray, ...]:
    """_indicators and per-example correctness (n,) float: the label matches, or in a multi-label task the whole
    label set does (exact match)."""
    tp, fp, fn = _indicators(gold, pred, n_classes)
    return tp, fp, fn, (gold == pred).all(axis=1).astype(float) if gold.ndim == 2 else tp.sum(axis=1)


def macro_f1_from_counts(tp: np.ndarray, fp: np.ndarray, fn: np.ndarray) -> np.ndarray:
    """Macro-F1 from per-class counts of shape (..., C), averaged over all C labels of the task (F1 = 0 where a
    label has no true positive), as scikit-learn's f1_score(labels=range(C), average="macro", zero_division=0)."""
    denom = 2 * tp + fp + fn
    f1 = np.divide(2 * tp, denom, out=np.zeros_like(denom, dtype=float), where=denom > 0)
    return f1.sum(axis=-1) / tp.shape[-1]


class _PairedCounts:
    """Per-seed, per-example indicators of both arms; metric values for example weightings in one matrix product."""

    def __init__(self, gold, preds_a, preds_b, n_classes: int | None = None):
        self.gold = np.asarray(gold, dtype=np.int64)
        n = self.gold.shape[0] if self.gold.ndim else 0
        if n == 0:
            raise ValueError("paired tests need at least one test example")
        if self.gold.ndim == 2:  # multi-label: 0/1 matrices over the task's labels
            c = self.gold.shape[1]
            if n_classes is not None and c != n_classes or not np.isin(self.gold, (0, 1)).all():
                raise ValueError(f"multi-label gold must be a 0/1 matrix over the task's {n_classes} labels")
            self.a, self.b = _as_matrix_runs(preds_a, n, c), _as_matrix_runs(preds_b, n, c)
        else:
            self.a, self.b = _as_runs(preds_a, n), _as_runs(preds_b, n)
        if self.a.shape != self.b.shape:
            raise ValueError(f"both arms need the same seeds: shapes {self.a.shape} and {self.b.shape}")
        self.n, self.seeds = n, self.a.shape[0]
        if self.gold.ndim == 1:
            seen = int(max(self.gold.max(), self.a.max(), self.b.max())) + 1
            if n_classes is not None and seen > n_classes:
                raise ValueError(f"label id {seen - 1} is outside the task's {n_classes} labels")
            c = n_classes or seen  # the task's label set: every metric averages over the same labels
        self.ind_a = [_with_correct(self.gold, self.a[s], c) for s in range(self.seeds)]
        self.ind_b = [_with_correct(self.gold, self.b[s], c) for s in range(self.seeds)]

    def metrics(self, weights: np.ndarray, ind: list) -> dict[str, np.ndarray]:
        """Seed-averaged accuracy and macro-F1 for each row of example weights (R, n) -> (R,)."""
        acc = np.zeros(weights.shape[0])
        f1 = np.zeros(weights.shape[0])
        for tp, fp, fn, correct in ind:
            acc += (weights @ correct) / weights.sum(axis=1)
            f1 += macro_f1_from_counts(weights @ tp, weights @ fp, weights @ fn)
        return {"accuracy": acc / len(ind), "macro_f1": f1 / len(ind)}

    def per_seed_differences(self) -> dict[str, np.ndarray]:
        """(S,) difference a − b of each seed's metric on the whole test set."""
        w = np.ones((1, self.n))
        out = {m: np.zeros(self.seeds) for m in METRICS}
        for s, (ia, ib) in enumerate(zip(self.ind_a, self.ind_b)):
            ma, mb = self.metrics(w, [ia]), self.metrics(w, [ib])
            for m in METRICS:
                out[m][s] = ma[m][0] - mb[m][0]
        return out

    def observed(self) -> dict[str, float]:
        w = np.ones((1, self.n))
        ma, mb = self.metrics(w, self.ind_a), self.metrics(w, self.ind_b)
        return {m: float(ma[m][0] - mb[m][0]) for m in METRICS}


def _example_bootstrap(pc: _PairedCounts, n_resamples: int, rng: np.random.Generator) -> dict[str, np.ndarray]:
    """(R,) differences a − b of the seed-averaged metrics over test examples resampled with replacement (the
    same examples for every seed and both arms)."""
    diffs: dict[str, list[np.ndarray]] = {m: [] for m in METRICS}
    for start in range(0, n_resamples, _CHUNK):
        size = min(_CHUNK, n_resamples - start)
        idx = rng.integers(0, pc.n, size=(size, pc.n))
        # resample counts: how often each example was drawn in each resample, (R, n)
        w = np.zeros((size, pc.n))
        np.add.at(w, (np.arange(size)[:, None], idx), 1.0)
        ma, mb = pc.metrics(w, pc.ind_a), pc.metrics(w, pc.ind_b)
        for m in METRICS:
            diffs[m].append(ma[m] - mb[m])
    return {m: np.concatenate(d) if d else np.zeros(0) for m, d in diffs.items()}


def paired_bootstrap(gold, preds_a, preds_b, n_resamples: int, rng: np.random.Generator,
                     confidence: float = 0.95, n_classes: int | None = None) -> dict[str, dict[str, float]]:
    """Difference (a − b) of seed-averaged accuracy and macro-F1 with a percentile CI over resampled examples.

    ``p_better`` tests "a better than b" and ``p_worse`` "a worse than b" (each one-sided, shifted-null form of
    Berg-Kirkpatrick et al. 2012, §2), with the usual +1 in numerator and denominator.
    """
    pc = _PairedCounts(gold, preds_a, preds_b, n_classes)
    observed = pc.observed()
    diffs = _example_bootstrap(pc, n_resamples, rng)
    alpha = 1 - confidence
    out = {}
    for m in METRICS:
        d = diffs[m]
        low, high = np.percentile(d, [100 * alpha / 2, 100 * (1 - alpha / 2)])
        obs = observed[m]
        out[m] = {"difference": obs, "ci_low": float(low), "ci_high": float(high),
                  "p_better": float((np.count_nonzero(d - obs >= obs) + 1) / (d.size + 1)),
                  "p_worse": float((np.count_nonzero(d - obs <= obs) + 1) / (d.size + 1)),
                  "resamples": int(d.size)}
    return out


POWER = 0.8  # the power at which the smallest detectable difference is stated


def seed_aware_difference(gold, preds_a, preds_b, n_classes: int | None, n_resamples: int,
                          rng: np.random.Generator, confidence: float = 0.95) -> dict[str, dict[str, float]]:
    """The primary test: difference (a − b) of the seed-averaged metric with an interval that covers both
    seed-to-seed training variance and test-set sampling.

    The arms share their seeds (seed s fixes the classifier head's initialisation and the data order of both), so
    differences are paired by seed. Variance components of the seed-averaged difference D (a random seed effect
    plus test-example sampling, as in a mixed model with seeds as a random factor):
    - seeds: var(d_s) / S over the per-seed differences d_s on the whole test set (ddof 1; Dodge et al. 2020
      show this spread is of the size of many reported gains). It also holds the seed-specific part of the test
      noise, so the total errs on the wide side.
    - test examples: the variance of D over a paired bootstrap of the test examples (the same resampled examples
      for every seed and both arms; Efron & Tibshirani 1993, ch. 6).
    The interval is D ± t(df) · SE with SE² the sum and df from Welch–Satterthwaite (Satterthwaite 1946) with
    S − 1 and n − 1 degrees of freedom for the two parts, so that 3 or 5 seeds give the wide t quantiles they
    need; ``p_value`` is two-sided. ``min_detectable`` is the smallest difference found with probability
    ``POWER`` at this level: (t(1 − α/2) + t(POWER)) · SE (the usual normal-approximation power formula with t
    quantiles, common practice).
    """
    pc = _PairedCounts(gold, preds_a, preds_b, n_classes)
    observed, per_seed = pc.observed(), pc.per_seed_differences()
    boot = _example_bootstrap(pc, n_resamples, rng)
    alpha, out = 1 - confidence, {}
    for m in METRICS:
        d = per_seed[m]
        seed_var = float(d.var(ddof=1) / d.size) if d.size >= 2 else 0.0
        example_var = float(boot[m].var(ddof=1)) if n_resamples >= 2 else 0.0
        total = seed_var + example_var
        parts = (seed_var ** 2 / (d.size - 1) if d.size >= 2 else 0.0) + example_var ** 2 / max(pc.n - 1, 1)
        df = total ** 2 / parts if parts > 0 else float(max(pc.n - 1, 1))
        se, diff = math.sqrt(total), observed[m]
        t = float(stats.t.ppf(1 - alpha / 2, df))
        if se > 0:
            p = float(2 * stats.t.sf(abs(diff) / se, df))
        else:
            p = 1.0 if diff == 0 else 0.0
        out[m] = {"difference": diff, "ci_low": diff - t * se, "ci_high": diff + t * se, "p_value": p,
                  "se": se, "df": df, "seed_variance": seed_var, "example_variance": example_var,
                  "min_detectable": (t + float(stats.t.ppf(POWER, df))) * se, "power": POWER,
                  "per_seed": d.tolist(), "resamples": n_resamples}
    return out


def holm(p_values: list[float]) -> list[float]:
    """Holm's step-down adjusted p-values (Holm 1979), in the input order."""
    p = np.asarray(p_values, dtype=float)
    order = np.argsort(p, kind="stable")
    adjusted = np.empty_like(p)
    running = 0.0
    for rank, i in enumerate(order):
        running = max(running, min(1.0, (p.size - rank) * p[i]))
        adjusted[i] = running
    return adjusted.tolist()


def _sign_patterns(n: int, n_resamples: int, rng: np.random.Generator) -> tuple[np.ndarray, bool]:
    """Rows of swap indicators (1 = swap the arms for that example): all 2^n when that is few enough."""
    if n < 63 and 2 ** n <= n_resamples:
        return np.array(list(itertools.product((0.0, 1.0), repeat=n))), True
    return rng.integers(0, 2, size=(n_resamples, n)).astype(float), False


def paired_permutation(gold, preds_a, preds_b, n_resamples: int, rng: np.random.Generator,
                       n_classes: int | None = None) -> dict[str, dict[str, float]]:
    """Paired permutation test of the seed-averaged difference (a − b) in accuracy and macro-F1.

    Under the null hypothesis the two arms are exchangeable per example, so each example's predictions (all
    seeds) are swapped between the arms at random. p-values count null statistics at least as extreme as the
    observed one, with scipy.stats.permutation_test's tie tolerance and +1 adjustment for random resamples.
    """
    pc = _PairedCounts(gold, preds_a, preds_b, n_classes)
    observed = pc.observed()
    swaps, exact = _sign_patterns(pc.n, n_resamples, rng)
    null: dict[str, list[np.ndarray]] = {m: [] for m in METRICS}
    ones = np.ones((1, pc.n))
    for start in range(0, swaps.shape[0], _CHUNK):
        u = swaps[start:start + _CHUNK]  # (R, n)
        acc = np.zeros(u.shape[0])
        f1 = np.zeros(u.shape[0])
        for ia, ib in zip(pc.ind_a, pc.ind_b):
            # counts of arm a after swapping = a's totals + swapped examples' (b − a); arm b the reverse
            delta = [u @ (xb - xa) for xa, xb in zip(ia, ib)]
            tot_a = [ones @ xa for xa in ia]
            tot_b = [ones @ xb for xb in ib]
            cnt_a = [t + d for t, d in zip(tot_a, delta)]
            cnt_b = [t - d for t, d in zip(tot_b, delta)]
            acc += (cnt_a[3] - cnt_b[3]) / pc.n  # counts of correct examples
            f1 += macro_f1_from_counts(*cnt_a[:3]) - macro_f1_from_counts(*cnt_b[:3])
        null["accuracy"].append(acc / pc.seeds)
        null["macro_f1"].append(f1 / pc.seeds)
    adjustment = 0 if exact else 1
    out = {}
    for m in METRICS:
        d = np.concatenate(null[m])
        obs = observed[m]
        gamma = abs(np.finfo(float).eps * 100 * obs)
        out[m] = {"difference": obs,
                  "p_better": float((np.count_nonzero(d >= obs - gamma) + adjustment) / (d.size + adjustment)),
                  "p_worse": float((np.count_nonzero(d <= obs + gamma) + adjustment) / (d.size + adjustment)),
                  "resamples": int(d.size), "exact": exact}
    return out


def mcnemar_exact(correct_a, correct_b) -> dict[str, float]:
    """Exact McNemar test: two-sided binomial test on the discordant pairs (b: only a correct, c: only b correct)."""
    ca = np.asarray(correct_a, dtype=bool)
    cb = np.asarray(correct_b, dtype=bool)
    b = int(np.count_nonzero(ca & ~cb))
    c = int(np.count_nonzero(~ca & cb))
    p = 1.0 if b + c == 0 else min(1.0, 2.0 * float(stats.binom.cdf(min(b, c), b + c, 0.5)))
    return {"only_a_correct": b, "only_b_correct": c, "p_value": p}


def majority_vote(preds) -> np.ndarray:
    """Per example, the label most seeds predicted; a tie goes to the tied label the earliest seed predicted.
    Multi-label predictions (S, n, C) vote on whole label sets the same way (an (n, C) result)."""
    p = np.asarray(preds, dtype=np.int64)
    p = p[None, :] if p.ndim == 1 else p
    out = np.empty(p.shape[1:], dtype=np.int64)
    for i in range(p.shape[1]):
        votes = [tuple(v) if p.ndim == 3 else v for v in p[:, i].tolist()]
        counts = Counter(votes)
        top = max(counts.values())
        out[i] = next(v for v in votes if counts[v] == top)
    return out


def _exact(pred: np.ndarray, gold: np.ndarray) -> np.ndarray:
    """Per-example correctness: the label, or the whole label set of a multi-label task, matches."""
    return (pred == gold).all(axis=-1) if gold.ndim == 2 else pred == gold


def compare_pair(gold, preds_a, preds_b, seed_metrics_a: dict[str, list[float]],
                 seed_metrics_b: dict[str, list[float]], confidence: float = 0.95, bootstrap_resamples: int = 2000,
                 permutation_resamples: int = 5000, seed: int = 0, n_classes: int | None = None) -> dict:
    """All paired tests of arm a against arm b; ``seed_metrics_*`` are per-seed test metrics in seed order.
    ``primary`` (seed_aware_difference) decides the verdict; the others are secondary and seeds stay fixed in them.
    """
    gold = np.asarray(gold, dtype=np.int64)
    if gold.ndim == 2:
        a, b = (_as_matrix_runs(x, *gold.shape) for x in (preds_a, preds_b))
    else:
        a, b = _as_runs(preds_a, len(gold)), _as_runs(preds_b, len(gold))
    boot_rng, perm_rng, primary_rng = (np.random.default_rng(s) for s in np.random.SeedSequence(seed).spawn(3))
    vote_a, vote_b = majority_vote(a), majority_vote(b)
    return {
        "n_examples": int(gold.shape[0]),
        "n_seeds": int(a.shape[0]),
        "confidence": confidence,
        "primary": seed_aware_difference(gold, a, b, n_classes, bootstrap_resamples, primary_rng, confidence),
        "bootstrap": paired_bootstrap(gold, a, b, bootstrap_resamples, boot_rng, confidence, n_classes),
        "permutation": paired_permutation(gold, a, b, permutation_resamples, perm_rng, n_classes),
        "mcnemar_majority_vote": mcnemar_exact(_exact(vote_a, gold), _exact(vote_b, gold)),
        "mcnemar_per_seed": [mcnemar_exact(_exact(a[s], gold), _exact(b[s], gold)) for s in range(a.shape[0])],
        # same-seed differences: how much of the effect survives seed-to-seed variation
        "seed_differences": {m: summarize(np.subtract(seed_metrics_a[m], seed_metrics_b[m]), confidence)
                             for m in METRICS},
    }


def verdict(pair: dict, arm: str, reference: str, metric: str = "macro_f1", min_seeds: int = 5,
            adjusted_p: float | None = None, n_compared: int = 1) -> dict:
    """Plain-words outcome from the seed-aware primary test of ``metric``: "better" or "worse" only when its
    p-value, Holm-adjusted over the ``n_compared`` arms tested against the reference (``adjusted_p``), is below
    1 − confidence; the interval shown is the unadjusted one."""
    prim = pair["primary"][metric]
    conf = round(100 * pair["confidence"])
    alpha = 1 - pair["confidence"]
    name = METRIC_NAMES[metric]
    p_adj = prim["p_value"] if adjusted_p is None else adjusted_p
    if p_adj < alpha and prim["difference"] > 0:
        outcome = f"{arm} better"
    elif p_adj < alpha and prim["difference"] < 0:
        outcome = f"{arm} worse"
    else:
        outcome = "no detectable difference"
    holm_note = f", Holm-adjusted over {n_compared} arms p={p_adj:.3g}" if n_compared > 1 else ""
    text = (f"{outcome} ({arm} vs {reference}): {name} {prim['difference']:+.3f} "
            f"({conf}% CI {prim['ci_low']:+.3f} to {prim['ci_high']:+.3f} over {pair['n_seeds']} seed(s) and "
            f"{pair['n_examples']} test examples; p={prim['p_value']:.3g}{holm_note}); smallest difference this "
            f"design detects with {prim['power']:.0%} power: {prim['min_detectable']:.3f}")
    cautions = []
    if pair["n_seeds"] < min_seeds:
        cautions.append(f"only {pair['n_seeds']} seed(s): fine-tuning results vary a lot with the seed "
                        f"(Dodge et al. 2020); rerun with {min_seeds} or more seeds before relying on this")
    if outcome == "no detectable difference":
        cautions.append("not evidence that the arms are equal: differences inside the CI cannot be ruled out")
    return {"pair": f"{arm} vs {reference}", "outcome": outcome, "metric": metric,
            "difference": prim["difference"], "ci_low": prim["ci_low"], "ci_high": prim["ci_high"],
            "p_value": prim["p_value"], "p_adjusted": p_adj, "min_detectable": prim["min_detectable"],
            "confidence": pair["confidence"], "text": text, "cautions": cautions}
