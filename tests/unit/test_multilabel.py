"""Multi-label tasks: reading label lists, metrics, the dev threshold rule and the paired tests on indicator
matrices, each checked against scikit-learn, statsmodels or a brute-force loop."""

from __future__ import annotations

import itertools
import json
from pathlib import Path

import numpy as np
import pytest
from sklearn.metrics import accuracy_score, f1_score
from statsmodels.stats.contingency_tables import mcnemar

from adapt.common.errors import ConfigError, InputError
from adapt.config import compose_job
from adapt.contracts.labelled_task import read_labelled_file, read_task
from adapt.evaluation.finetune import THRESHOLDS, choose_threshold, score_multilabel, thresholded
from adapt.evaluation.significance import (_PairedCounts, compare_pair, indicator_matrix, macro_f1_from_counts,
                                           majority_vote, paired_bootstrap, paired_permutation, _indicators)


def _write(folder: Path, name: str, lines: list) -> None:
    folder.mkdir(parents=True, exist_ok=True)
    text = "\n".join(x if isinstance(x, str) else json.dumps(x) for x in lines) + "\n"
    (folder / name).write_text(text, encoding="utf-8")


def _jsonl_task(folder: Path, train=None, dev=None, test=None) -> Path:
    _write(folder, "train.jsonl", train or [{"text": "a", "label": ["x", "y"]}, {"text": "b", "label": "x"},
                                            {"text": "c", "label": []}, {"text": "d", "label": ["z"]}])
    _write(folder, "dev.jsonl", dev or [{"text": "e", "label": ["y", "x"]}, {"text": "f", "label": "z"}])
    _write(folder, "test.jsonl", test or [{"text": "g", "label": ["x", "z", "x"]}, {"text": "h", "label": ["y"]}])
    return folder


# --- reading -------------------------------------------------------------------------------------------------


def test_jsonl_lists_make_a_multilabel_task(tmp_path):
    task = read_task(_jsonl_task(tmp_path))
    assert task.multi_label and task.labels == ["x", "y", "z"]
    # a scalar is a one-label list, [] is no label, ids are sorted and a repeated label counts once
    assert task.train.label_ids == [[0, 1], [0], [], [2]]
    assert task.dev.label_ids == [[0, 1], [2]]
    assert task.test.label_ids == [[0, 2], [1]]
    assert task.with_train_subset([0, 3]).multi_label


def test_single_label_task_keeps_plain_ids(tmp_path):
    lines = [{"text": "a", "label": "x"}, {"text": "b", "label": "y"}]
    for split in ("train", "dev", "test"):
        _write(tmp_path, f"{split}.jsonl", lines)
    task = read_task(tmp_path)
    assert not task.multi_label and task.train.label_ids == [0, 1]


def test_csv_delimiter_splits_label_cells(tmp_path):
    _write(tmp_path, "train.csv", ["text,label", "a,x|y", "b,x", "c,", "d, z "])
    _write(tmp_path, "dev.tsv", ["text\tlabel", "e\ty|x"])
    _write(tmp_path, "test.jsonl", [{"text": "g", "label": ["z", "x"]}, {"text": "h", "label": "y"}])
    task = read_task(tmp_path, label_delimiter="|")
    assert task.multi_label and task.labels == ["x", "y", "z"]
    assert task.train.label_ids == [[0, 1], [0], [], [2]]
    assert task.dev.label_ids == [[0, 1]] and task.test.label_ids == [[0, 2], [1]]
    # without the delimiter "x|y" is one label of its own and the empty cell is refused with its line
    with pytest.raises(InputError, match=r"train.csv:4: field 'label' must be a single non-empty label.*"
                                         r"task.label_delimiter"):
        read_task(tmp_path)


@pytest.mark.parametrize("train, delimiter, pattern", [
    ([{"text": "a", "label": ["x", ""]}], None, r"train.jsonl:1: field 'label' holds an empty or non-text label"),
    ([{"text": "a", "label": ["x", ["y"]]}], None, r"train.jsonl:1: .*non-text label \(\['y'\]\)"),
    ([{"text": "a", "label": "x"}, {"text": "b", "label": "x|y"}], "|",
     r"train.jsonl:2: field 'label' is 'x\|y', holding task.label_delimiter='\|'.*JSON list"),
])
def test_bad_label_lists_are_one_line_errors(tmp_path, train, delimiter, pattern):
    _jsonl_task(tmp_path, train=train + [{"text": "z", "label": ["x", "y", "z"]}])
    if delimiter is not None:  # a csv file so that the delimiter applies somewhere
        _write(tmp_path, "dev.csv", ["text,label", "e,x|y"])
        (tmp_path / "dev.jsonl").unlink()
    with pytest.raises(InputError, match=pattern) as err:
        read_task(tmp_path, label_delimiter=delimiter)
    assert "\n" not in str(err.value)


def test_delimiter_with_only_jsonl_files_is_refused(tmp_path):
    _jsonl_task(tmp_path, train=[{"text": "a", "label": "x"}, {"text": "b", "label": "y"}],
                dev=[{"text": "e", "label": "x"}], test=[{"text": "g", "label": "x"}, {"text": "h", "label": "y"}])
    with pytest.raises(InputError, match=r"task.label_delimiter='\|' is set but every task file is jsonl"):
        read_task(tmp_path, label_delimiter="|")


def test_unknown_and_missing_labels_per_label(tmp_path):
    _jsonl_task(tmp_path / "a", dev=[{"text": "e", "label": ["x"]}, {"text": "f", "label": ["y", "w"]}])
    with pytest.raises(InputError, match=r"dev.jsonl: label\(s\) \['w'\] do not occur in train.jsonl "
                                         r"\(first 'w' at dev.jsonl:2\)"):
        read_task(tmp_path / "a")
    # "z" never occurs in any test label list: refused, or scored as F1 = 0 when allowed
    _jsonl_task(tmp_path / "b", test=[{"text": "g", "label": ["x", "y"]}, {"text": "h", "label": []}])
    with pytest.raises(InputError, match=r"test.jsonl: no example of label 'z'"):
        read_task(tmp_path / "b")
    assert read_task(tmp_path / "b", allow_missing_test_labels=True).test.label_ids == [[0, 1], []]


def test_label_delimiter_key_is_validated():
    cfg = compose_job("compare", ["+arms.base=x", "task.dir=x", "task.label_delimiter='|'"])
    assert cfg.task.label_delimiter == "|"
    with pytest.raises(ConfigError, match=r"task.label_delimiter=' ' must be a non-blank string"):
        compose_job("compare", ["+arms.base=x", "task.dir=x", "task.label_delimiter=' '"])


def test_other_readers_still_refuse_label_lists(tmp_path):
    _write(tmp_path, "gold.jsonl", [{"text": "a", "label": ["x", "y"]}])
    with pytest.raises(InputError, match=r"gold.jsonl:1: field 'label' must be a single non-empty label"):
        read_labelled_file(tmp_path / "gold.jsonl", label_field="label", key_prefix="quality")


# --- metrics and the threshold rule -------------------------------------------------------------------------


def test_multilabel_metrics_worked_example():
    # worked example, counted by hand (definitions of the scikit-learn user guide, "Model evaluation": accuracy
    # score = subset accuracy for multilabel input; "Precision, recall and F-measures", multilabel case):
    # gold {0,1} {1} {} / pred {0} {1} {2}: exact matches 1 of 3; label 0: tp 1 -> F1 1; label 1: tp 1, fn 1 ->
    # F1 2/3; label 2: fp 1 -> F1 0; macro (1 + 2/3 + 0) / 3 = 5/9; micro tp 2, fp 1, fn 1 -> 4/6
    m = score_multilabel([[0, 1], [1], []], [[0], [1], [2]], 3)
    assert m["accuracy"] == pytest.approx(1 / 3)
    assert m["macro_f1"] == pytest.approx(5 / 9)
    assert m["micro_f1"] == pytest.approx(2 / 3)
    assert m["per_label_f1"] == pytest.approx([1.0, 2 / 3, 0.0])


def test_count_based_macro_f1_matches_sklearn_on_random_indicator_matrices():
    # reference: scikit-learn f1_score(labels=range(C), average="macro", zero_division=0) on indicator matrices
    rng = np.random.default_rng(3)
    for _ in range(20):
        n, c = int(rng.integers(1, 30)), int(rng.integers(2, 6))
        gold, pred = rng.integers(0, 2, (n, c)), rng.integers(0, 2, (n, c))
        got = macro_f1_from_counts(*[x.sum(axis=0) for x in _indicators(gold, pred, c)])
        ref = f1_score(gold, pred, labels=list(range(c)), average="macro", zero_division=0)
        assert got == pytest.approx(ref, abs=1e-12)
        ids = [np.flatnonzero(r).tolist() for r in gold]
        assert (indicator_matrix(ids, c) == gold).all()
        ids_pred = [np.flatnonzero(r).tolist() for r in pred]
        m = score_multilabel(ids, ids_pred, c)
        assert m["accuracy"] == accuracy_score(gold, pred)  # subset accuracy (scikit-learn accuracy_score)
        assert m["accuracy"] == np.mean([(g == q).all() for g, q in zip(gold, pred)])


def test_threshold_grid_and_rule_match_a_brute_force_search():
    assert THRESHOLDS[0] == 0.05 and THRESHOLDS[-1] == 0.95 and len(THRESHOLDS) == 19
    rng = np.random.default_rng(7)
    for _ in range(3):
        n, c = 25, 4
        gold = rng.integers(0, 2, (n, c))
        probs = np.clip(0.5 * gold + rng.uniform(-0.3, 0.6, (n, c)), 0, 1)
        ids = [np.flatnonzero(r).tolist() for r in gold]
        # brute force: scikit-learn macro-F1 at every grid value k/20, first (smallest) maximum wins
        scores = [f1_score(gold, (probs >= k / 20).astype(int), labels=list(range(c)), average="macro",
                           zero_division=0) for k in range(1, 20)]
        best = int(np.argmax(scores))  # np.argmax returns the first maximum
        t, m = choose_threshold(ids, probs, c)
        assert t == pytest.approx((best + 1) / 20) and m["macro_f1"] == pytest.approx(scores[best])
        assert thresholded(probs, t) == [np.flatnonzero(r >= t).tolist() for r in probs]


def test_threshold_ties_go_to_the_smallest():
    # every grid value up to 0.40 gives the same (perfect) predictions, so 0.05 is chosen
    probs = np.array([[0.9, 0.01], [0.01, 0.42]])
    assert choose_threshold([[0], [1]], probs, 2)[0] == 0.05
    # a probability equal to the threshold predicts the label ("at least the threshold")
    assert thresholded(np.array([[0.5, 0.49]]), 0.5) == [[0]]


def test_majority_vote_on_label_sets():
    # per example the label set most seeds predicted; a tie goes to the earliest seed's set (common practice)
    p = np.array([[[1, 0], [1, 1]], [[1, 0], [0, 1]], [[0, 1], [1, 1]]])  # (3 seeds, 2 examples, 2 labels)
    assert majority_vote(p).tolist() == [[1, 0], [1, 1]]
    assert majority_vote(p[1:]).tolist() == [[1, 0], [0, 1]]


# --- paired tests on indicator matrices ---------------------------------------------------------------------


def _tiny_case(seed: int = 0, n: int = 6, c: int = 3, seeds: int = 2):
    rng = np.random.default_rng(seed)
    gold = rng.integers(0, 2, (n, c))
    flip = lambda p: np.where(rng.random((seeds, n, c)) < p, 1 - gold, gold)  # noqa: E731
    return gold, flip(0.15), flip(0.35)


def _sk(gold, pred):
    c = gold.shape[1]
    return {"accuracy": accuracy_score(gold, pred),
            "macro_f1": f1_score(gold, pred, labels=list(range(c)), average="macro", zero_division=0)}


def _seed_mean(gold, preds, rows):
    per_seed = [_sk(gold[rows], p[rows]) for p in preds]
    return {m: np.mean([x[m] for x in per_seed]) for m in ("accuracy", "macro_f1")}


def test_paired_counts_match_sklearn_per_seed():
    gold, a, b = _tiny_case()
    pc = _PairedCounts(gold, a, b, 3)
    rows = np.arange(len(gold))
    ref_a, ref_b = _seed_mean(gold, a, rows), _seed_mean(gold, b, rows)
    obs = pc.observed()
    for m in ("accuracy", "macro_f1"):
        assert obs[m] == pytest.approx(ref_a[m] - ref_b[m], abs=1e-12)
        per_seed = [_sk(gold, a[s])[m] - _sk(gold, b[s])[m] for s in range(2)]
        assert pc.per_seed_differences()[m] == pytest.approx(per_seed, abs=1e-12)


def test_bootstrap_matches_a_brute_force_loop():
    # brute force: draw the same resamples (the same generator calls), recompute with scikit-learn per resample;
    # percentile CI and p = share of (d - obs) >= obs, +1 in both (Berg-Kirkpatrick et al. 2012, section 2)
    gold, a, b = _tiny_case(1)
    got = paired_bootstrap(gold, a, b, 60, np.random.default_rng(5), n_classes=3)
    idx = np.random.default_rng(5).integers(0, len(gold), size=(60, len(gold)))
    means = [(_seed_mean(gold, a, r), _seed_mean(gold, b, r)) for r in idx]
    for m in ("accuracy", "macro_f1"):
        d = np.array([ma[m] - mb[m] for ma, mb in means])
        obs = _seed_mean(gold, a, np.arange(len(gold)))[m] - _seed_mean(gold, b, np.arange(len(gold)))[m]
        low, high = np.percentile(d, [2.5, 97.5])
        assert got[m]["difference"] == pytest.approx(obs, abs=1e-12)
        assert (got[m]["ci_low"], got[m]["ci_high"]) == pytest.approx((low, high), abs=1e-12)
        assert got[m]["p_better"] == pytest.approx((np.sum(d - obs >= obs - 1e-12) + 1) / 61)


def test_permutation_matches_exhaustive_swaps():
    # brute force over all 2^n ways to swap examples between the arms (exact when 2^n <= resamples)
    gold, a, b = _tiny_case(2, n=5)
    got = paired_permutation(gold, a, b, 64, np.random.default_rng(0), n_classes=3)
    rows = np.arange(5)
    obs = {m: _seed_mean(gold, a, rows)[m] - _seed_mean(gold, b, rows)[m] for m in ("accuracy", "macro_f1")}
    null = {m: [] for m in obs}
    for swap in itertools.product((False, True), repeat=5):
        s = np.array(swap)[None, :, None]
        ma, mb = _seed_mean(gold, np.where(s, b, a), rows), _seed_mean(gold, np.where(s, a, b), rows)
        for m in obs:
            null[m].append(ma[m] - mb[m])
    for m in obs:
        d = np.array(null[m])
        assert got[m]["exact"] and got[m]["resamples"] == 32
        assert got[m]["p_better"] == pytest.approx(np.mean(d >= obs[m] - 1e-9))
        assert got[m]["p_worse"] == pytest.approx(np.mean(d <= obs[m] + 1e-9))


def test_one_hot_matrices_give_the_single_label_results():
    # a single-label task written as one-hot indicator matrices has the same counts, so the same statistics
    rng = np.random.default_rng(4)
    gold, a, b = rng.integers(0, 3, 20), rng.integers(0, 3, (2, 20)), rng.integers(0, 3, (2, 20))
    eye = np.eye(3, dtype=np.int64)
    ids = compare_pair(gold, a, b, {"accuracy": [0, 0], "macro_f1": [0, 0]}, {"accuracy": [0, 0], "macro_f1": [0, 0]},
                       bootstrap_resamples=300, permutation_resamples=300, n_classes=3)
    mat = compare_pair(eye[gold], eye[a], eye[b], {"accuracy": [0, 0], "macro_f1": [0, 0]},
                       {"accuracy": [0, 0], "macro_f1": [0, 0]}, bootstrap_resamples=300,
                       permutation_resamples=300, n_classes=3)
    for test in ("primary", "bootstrap", "permutation"):
        for m in ("accuracy", "macro_f1"):
            for key, value in ids[test][m].items():
                assert mat[test][m][key] == pytest.approx(value, abs=1e-12), (test, m, key)
    assert mat["mcnemar_per_seed"] == ids["mcnemar_per_seed"]
    assert mat["mcnemar_majority_vote"] == ids["mcnemar_majority_vote"]


def test_mcnemar_uses_exact_match_correctness():
    # reference: statsmodels mcnemar(table, exact=True) (binomial test on the discordant pairs, McNemar 1947)
    gold, a, b = _tiny_case(6, n=40, seeds=1)
    pair = compare_pair(gold, a, b, {"accuracy": [0], "macro_f1": [0]}, {"accuracy": [0], "macro_f1": [0]},
                        bootstrap_resamples=50, permutation_resamples=50, n_classes=3)
    ca, cb = (a[0] == gold).all(axis=1), (b[0] == gold).all(axis=1)
    table = [[np.sum(ca & cb), np.sum(ca & ~cb)], [np.sum(~ca & cb), np.sum(~ca & ~cb)]]
    assert pair["mcnemar_per_seed"][0]["p_value"] == pytest.approx(mcnemar(table, exact=True).pvalue)
    assert pair["mcnemar_per_seed"][0]["only_a_correct"] == table[0][1]
