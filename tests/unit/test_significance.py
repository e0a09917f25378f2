"""Statistics checked against reference implementations (scipy, statsmodels, scikit-learn)."""

from __future__ import annotations

import numpy as np
import pytest
from scipy import stats
from sklearn.metrics import f1_score
from statsmodels.stats.contingency_tables import mcnemar

from adapt.evaluation.significance import (compare_pair, macro_f1_from_counts, majority_vote, mcnemar_exact, paired_bootstrap,
                                paired_permutation, summarize, verdict)


def noisy_predictions(gold: np.ndarray, accuracy: float, n_classes: int, rng: np.random.Generator) -> np.ndarray:
    """Predictions that equal gold with probability ``accuracy``, else a uniformly drawn other label."""
    wrong = (gold + rng.integers(1, n_classes, size=gold.shape)) % n_classes
    return np.where(rng.random(gold.shape) < accuracy, gold, wrong)


def test_summarize_t_interval_matches_scipy():
    values = [0.71, 0.74, 0.69, 0.77, 0.73]
    s = summarize(values, confidence=0.95)
    # reference: scipy.stats.t.interval(confidence, df=n-1, loc=mean, scale=standard error of the mean)
    low, high = stats.t.interval(0.95, df=4, loc=np.mean(values), scale=stats.sem(values))
    assert s["ci_low"] == pytest.approx(low, abs=1e-12) and s["ci_high"] == pytest.approx(high, abs=1e-12)
    assert s["sd"] == pytest.approx(np.std(values, ddof=1))
    wide = summarize([0.1, 0.9], bounds=(0.0, 1.0))  # the unclipped t-interval is about -4.6 to 5.6
    assert wide["ci_low"] == 0.0 and wide["ci_high"] == 1.0 and summarize([0.1, 0.9])["ci_low"] < 0
    one = summarize([0.5])
    assert one["mean"] == 0.5 and one["sd"] is None and one["ci_low"] is None


@pytest.mark.parametrize("b, c", [(0, 0), (3, 9), (10, 10), (1, 12), (25, 40)])
def test_mcnemar_exact_matches_statsmodels(b, c):
    ca = np.array([True] * 30 + [True] * b + [False] * c + [False] * 7)
    cb = np.array([True] * 30 + [False] * b + [True] * c + [False] * 7)
    ours = mcnemar_exact(ca, cb)
    # reference: statsmodels.stats.contingency_tables.mcnemar(table, exact=True) (binomial test on b and c)
    ref = mcnemar([[30, b], [c, 7]], exact=True)
    assert ours["only_a_correct"] == b and ours["only_b_correct"] == c
    assert ours["p_value"] == pytest.approx(ref.pvalue, abs=1e-12)


def test_macro_f1_from_counts_matches_sklearn():
    rng = np.random.default_rng(1)
    for _ in range(20):
        gold = rng.integers(0, 4, size=30)
        pred = rng.integers(0, 5, size=30)  # label 4 never in gold; some labels may be missing entirely
        c = 5
        tp = np.array([np.sum((gold == k) & (pred == k)) for k in range(c)], dtype=float)
        fp = np.array([np.sum((gold != k) & (pred == k)) for k in range(c)], dtype=float)
        fn = np.array([np.sum((gold == k) & (pred != k)) for k in range(c)], dtype=float)
        # reference: sklearn.metrics.f1_score(average="macro"), labels = those in gold or predictions
        ref = f1_score(gold, pred, average="macro", zero_division=0)
        assert macro_f1_from_counts(tp, fp, fn) == pytest.approx(ref, abs=1e-12)


def test_macro_f1_worked_example():
    # scikit-learn f1_score documentation example: y_true=[0,1,2,0,1,2], y_pred=[0,2,1,0,0,1] -> 0.2666...
    tp, fp, fn = np.array([2.0, 0, 0]), np.array([1.0, 2, 1]), np.array([0.0, 2, 2])
    assert macro_f1_from_counts(tp, fp, fn) == pytest.approx(0.26666, abs=1e-4)


def test_paired_bootstrap_accuracy_ci_matches_scipy_bootstrap():
    rng = np.random.default_rng(2)
    n, seeds = 200, 3
    gold = rng.integers(0, 4, size=n)
    a = np.stack([noisy_predictions(gold, 0.75, 4, rng) for _ in range(seeds)])
    b = np.stack([noisy_predictions(gold, 0.68, 4, rng) for _ in range(seeds)])
    ours = paired_bootstrap(gold, a, b, n_resamples=4000, rng=np.random.default_rng(3), confidence=0.95)
    # The seed-averaged accuracy difference is the mean over examples of d_i = mean_s(correct_a - correct_b),
    # so its paired bootstrap CI is the bootstrap CI of a mean. Reference: scipy.stats.bootstrap(method="percentile").
    d = ((a == gold).astype(float) - (b == gold)).mean(axis=0)
    ref = stats.bootstrap((d,), np.mean, n_resamples=4000, method="percentile", confidence_level=0.95,
                          rng=np.random.default_rng(4))
    acc = ours["accuracy"]
    assert acc["difference"] == pytest.approx(d.mean(), abs=1e-12)
    # both are Monte Carlo estimates: allow a few standard errors of a percentile estimate
    assert acc["ci_low"] == pytest.approx(ref.confidence_interval.low, abs=0.012)
    assert acc["ci_high"] == pytest.approx(ref.confidence_interval.high, abs=0.012)
    # macro-F1: the observed difference is the seed-averaged scikit-learn difference
    f1 = [f1_score(gold, a[s], average="macro") - f1_score(gold, b[s], average="macro") for s in range(seeds)]
    assert ours["macro_f1"]["difference"] == pytest.approx(np.mean(f1), abs=1e-12)
    assert ours["macro_f1"]["ci_low"] < ours["macro_f1"]["difference"] < ours["macro_f1"]["ci_high"]


def _mean_diff(x, y, axis=-1):
    return np.mean(x - y, axis=axis)


def test_permutation_exact_matches_scipy_permutation_test():
    rng = np.random.default_rng(5)
    n, seeds = 10, 2
    gold = rng.integers(0, 3, size=n)
    a = np.stack([noisy_predictions(gold, 0.8, 3, rng) for _ in range(seeds)])
    b = np.stack([noisy_predictions(gold, 0.5, 3, rng) for _ in range(seeds)])
    ours = paired_permutation(gold, a, b, n_resamples=5000, rng=np.random.default_rng(0))
    assert ours["accuracy"]["exact"]
    ca, cb = (a == gold).mean(axis=0), (b == gold).mean(axis=0)
    # reference: scipy.stats.permutation_test, permutation_type="samples" (paired), exact for 2^10 <= n_resamples
    for alternative, key in (("greater", "p_better"), ("less", "p_worse")):
        ref = stats.permutation_test((ca, cb), _mean_diff, permutation_type="samples", alternative=alternative,
                                     n_resamples=5000, vectorized=True)
        assert ours["accuracy"][key] == pytest.approx(ref.pvalue, abs=1e-12)


def test_permutation_macro_f1_exact_matches_scipy_permutation_test():
    rng = np.random.default_rng(11)
    n, seeds = 6, 2  # 2^6 sign patterns x 4 scikit-learn calls keeps the reference quick
    gold = rng.integers(0, 3, size=n)
    a = np.stack([noisy_predictions(gold, 0.8, 3, rng) for _ in range(seeds)])
    b = np.stack([noisy_predictions(gold, 0.4, 3, rng) for _ in range(seeds)])
    ours = paired_permutation(gold, a, b, n_resamples=1000, rng=np.random.default_rng(0))

    # scipy swaps x_i and y_i of a pair; to swap all seeds of an example together, pack them into one integer
    def unpack(x):
        return np.stack([x // 3, x % 3])  # (seeds, n), labels < 3

    def f1_diff(x, y):
        px, py = unpack(x), unpack(y)
        return np.mean([f1_score(gold, px[s], average="macro") - f1_score(gold, py[s], average="macro")
                        for s in range(seeds)])

    # reference: scipy.stats.permutation_test(permutation_type="samples"), exact, statistic from sklearn f1_score
    ref = stats.permutation_test((a[0] * 3 + a[1], b[0] * 3 + b[1]), f1_diff, permutation_type="samples",
                                 alternative="greater", n_resamples=1000, vectorized=False)
    assert ours["macro_f1"]["exact"]
    assert ours["macro_f1"]["p_better"] == pytest.approx(ref.pvalue, abs=1e-12)


def test_permutation_random_matches_scipy_within_monte_carlo_error():
    rng = np.random.default_rng(6)
    n = 150
    gold = rng.integers(0, 4, size=n)
    a = noisy_predictions(gold, 0.72, 4, rng)[None]
    b = noisy_predictions(gold, 0.66, 4, rng)[None]
    ours = paired_permutation(gold, a, b, n_resamples=20000, rng=np.random.default_rng(7))
    assert not ours["accuracy"]["exact"]
    # reference: scipy.stats.permutation_test (random sign flips, permutation_type="samples")
    ref = stats.permutation_test(((a[0] == gold).astype(float), (b[0] == gold).astype(float)), _mean_diff,
                                 permutation_type="samples", alternative="greater", n_resamples=20000,
                                 vectorized=True, rng=np.random.default_rng(8))
    assert ours["accuracy"]["p_better"] == pytest.approx(ref.pvalue, abs=0.01)


def test_majority_vote_ties_go_to_earliest_seed():
    preds = np.array([[0, 1, 2, 3], [1, 1, 2, 0], [1, 2, 0, 3]])
    # common practice: label with most votes; tie (all differ in column 2) -> first seed's label
    assert majority_vote(preds).tolist() == [1, 1, 2, 3]
    assert majority_vote(np.array([[0, 1], [1, 0]])).tolist() == [0, 1]


@pytest.mark.parametrize("acc_a, acc_b, expected", [(0.9, 0.6, "adapted better"),
                                                    (0.6, 0.9, "adapted worse"),
                                                    (None, 0.7, "no detectable difference")])
def test_verdict_wording(acc_a, acc_b, expected):
    rng = np.random.default_rng(9)
    gold = rng.integers(0, 4, size=300)
    b = np.stack([noisy_predictions(gold, acc_b, 4, rng) for _ in range(3)])
    a = b.copy() if acc_a is None else np.stack([noisy_predictions(gold, acc_a, 4, rng) for _ in range(3)])
    seed_metrics = {m: [0.0] * 3 for m in ("accuracy", "macro_f1")}
    pair = compare_pair(gold, a, b, seed_metrics, seed_metrics, bootstrap_resamples=500,
                        permutation_resamples=500, seed=0)
    v = verdict(pair, "adapted", "base", metric="macro_f1", min_seeds=5)
    assert v["outcome"] == expected and v["text"].startswith(expected)
    assert (v["ci_low"] > 0) == (expected == "adapted better") and (v["ci_high"] < 0) == (expected == "adapted worse")
    assert any("Dodge et al. 2020" in c for c in v["cautions"])  # 3 seeds < 5
    if acc_a is None:
        assert pair["bootstrap"]["macro_f1"]["difference"] == 0 and pair["mcnemar_majority_vote"]["p_value"] == 1.0


def test_compare_pair_is_reproducible_for_a_seed():
    rng = np.random.default_rng(10)
    gold = rng.integers(0, 3, size=80)
    a = noisy_predictions(gold, 0.7, 3, rng)[None]
    b = noisy_predictions(gold, 0.6, 3, rng)[None]
    m = {"accuracy": [0.0], "macro_f1": [0.0]}
    first = compare_pair(gold, a, b, m, m, bootstrap_resamples=300, permutation_resamples=300, seed=1)
    again = compare_pair(gold, a, b, m, m, bootstrap_resamples=300, permutation_resamples=300, seed=1)
    other = compare_pair(gold, a, b, m, m, bootstrap_resamples=300, permutation_resamples=300, seed=2)
    assert first == again and first["bootstrap"] != other["bootstrap"]
