"""The report's numbers: equal to the source files', half-finished runs marked, foreign folders refused."""

from __future__ import annotations

import json
import math

import numpy as np
import pytest

from adapt.common.errors import InputError
from adapt.common.io import read_json
from adapt.config.report import ReportJob
from adapt.reporting.collect import collect
from adapt.reporting.downstream import per_class
from adapt.evaluation.pppl_paired import paired_ratio
from tests.unit.report_folders import LABELS, per_document, write_all, write_prepared, write_score


def test_numbers_equal_the_source_files(tmp_path):
    cfg = write_all(tmp_path)
    report, files = collect(cfg)
    profile = read_json(tmp_path / "prepared" / "profile.json")
    comparison = read_json(tmp_path / "compare" / "comparison.json")
    corpus = report["corpus"]["domain"]
    assert [(r["stage"], r["docs"], r["words"]) for r in corpus["funnel"]] == [
        (r["stage"], r["docs"], r["words"]) for r in profile["funnel"]]
    assert corpus["removed"] == {"near_duplicate": 17, "charset": 3}
    assert corpus["personal_data"]["findings"] == profile["personal_data"]["findings"]
    assert corpus["duplicates"]["duplicate_share"] == profile["duplicates"]["duplicate_share"]
    arms = {a["arm"]: a for a in report["downstream"]["arms"]}
    for arm, rec in comparison["arms"].items():
        assert arms[arm]["test_macro_f1"]["mean"] == rec["test_macro_f1"]["mean"]
        assert [r["test_accuracy"] for r in arms[arm]["per_seed"]] == [r["test_accuracy"] for r in rec["per_seed"]]
    v = report["verdict"]
    assert (v["difference"], v["ci_low"], v["ci_high"]) == (0.13, 0.05, 0.21) and v["outcome"] == "adapted better"
    rows = {(r["texts"], r["arm"]): r for r in report["pppl"]["rows"]}
    scores = read_json(tmp_path / "score" / "base-domain" / "scores.json")
    assert rows[("domain", "base")]["pseudo_perplexity"] == scores["pseudo_perplexity"]
    assert ("domain", "adapted") in rows  # the final/ folder of the pretrain run is the adapted arm
    training = report["training"]
    metrics = [json.loads(l) for l in (tmp_path / "pretrain" / "metrics.jsonl").read_text().splitlines()]
    assert training["train_loss"] == [m["loss"] for m in metrics if m["phase"] == "train"]
    assert training["heldout"]["domain"] == [[m["step"], m["heldout_loss_domain"]] for m in metrics
                                             if "heldout_loss_domain" in m]
    assert training["head_warmup"]["losses"] == [5.0, 4.5, 4.0]
    assert {p.name for p in files} >= {"profile.json", "metrics.jsonl", "result.json", "scores.json",
                                       "comparison.json", "predictions.jsonl"}
    json.dumps(report)  # the whole dict is JSON-able


def test_half_finished_runs_are_marked_not_used(tmp_path):
    cfg = write_all(tmp_path, pretrain_status="stopped", compare_status="failed")
    report, _ = collect(cfg)
    states = {s["role"]: s for s in report["sources"]}
    assert states["pretrain"]["state"] == "incomplete" and "'stopped'" in states["pretrain"]["note"]
    assert states["compare"]["state"] == "incomplete" and "'failed'" in states["compare"]["note"]
    # the stopped run's curves are shown up to where it stopped, its (absent) end figures are not invented
    assert report["training"]["steps"] == [1, 2, 3] and report["training"]["trainable_parameters"] is None
    # a failed compare run's comparison.json (left from an earlier run) is not trusted
    assert report["downstream"]["state"] == "incomplete" and "arms" not in report["downstream"]
    assert report["verdict"]["outcome"] is None and "has not completed" in report["verdict"]["sentence"]


def test_missing_parts_are_listed(tmp_path):
    prepared = write_prepared(tmp_path / "prepared")
    report, _ = collect(ReportJob(prepared_dir=str(prepared), out_dir=str(tmp_path / "r")))
    missing = {s["key"] for s in report["sources"] if s["state"] == "not given"}
    assert missing == {"general_dir", "pretrain_dir", "score_dirs", "compare_dir"}
    assert report["verdict"]["sentence"].startswith("No downstream verdict")


@pytest.mark.parametrize("make, expected", [
    (lambda p: p.mkdir(), "no manifest.json, so it is not an output folder of this tool"),
    (lambda p: (p.mkdir(), (p / "manifest.json").write_text('{"tool": "other"}')), "not written by this tool"),
    (lambda p: (p.mkdir(), (p / "manifest.json").write_text("{broken")), "is not valid JSON"),
    (lambda p: write_prepared(p), "this is the output of the prepare job, not of compare"),
])
def test_a_folder_that_is_not_a_compare_output_is_one_clear_error(tmp_path, make, expected):
    folder = tmp_path / "x"
    make(folder)
    with pytest.raises(InputError) as err:
        collect(ReportJob(compare_dir=str(folder), out_dir=str(tmp_path / "r")))
    message = str(err.value)
    assert message.startswith("compare_dir") and str(folder) in message and expected in message
    assert "\n" not in message


def test_paired_ratio_is_the_ratio_of_the_two_pseudo_perplexities(tmp_path):
    base = {"tokenizer_vocab_sha256": "h", "variant": "token", "max_seq_len": 64,
            "per_document": per_document(30, seed=2, shift=0.0)}
    adapted = {**base, "per_document": per_document(30, seed=3, shift=-0.5)}
    got = paired_ratio(adapted, base, bootstrap_resamples=0, confidence=0.95, seed=0)

    # Salazar et al. 2020: PPPL = exp(-ΣPLL / ΣT) over the whole set
    def pppl(docs):
        return math.exp(-sum(d["pll"] for d in docs) / sum(d["tokens"] for d in docs))

    matched = [i for i, (a, b) in enumerate(zip(adapted["per_document"], base["per_document"]))
               if a["tokens"] == b["tokens"]]
    expected = pppl([adapted["per_document"][i] for i in matched]) / pppl([base["per_document"][i] for i in matched])
    assert got["comparable"] and got["n_docs"] == len(matched) and got["ratio"] == pytest.approx(expected, rel=1e-12)


def test_paired_interval_agrees_with_scipy_bootstrap():
    # reference library: scipy.stats.bootstrap (paired resampling of the documents, percentile method)
    from scipy.stats import bootstrap

    docs = per_document(60, seed=4, shift=0.0)
    base = {"tokenizer_vocab_sha256": "h", "variant": "token", "max_seq_len": 64, "per_document": docs}
    rng = np.random.default_rng(5)
    adapted = {**base, "per_document": [{**d, "pll": d["pll"] * (0.9 + 0.1 * rng.random())} for d in docs]}
    ours = paired_ratio(adapted, base, bootstrap_resamples=20000, confidence=0.9, seed=0)
    a = np.array([d["pll"] for d in adapted["per_document"]])
    b = np.array([d["pll"] for d in docs])
    t = np.array([d["tokens"] for d in docs], dtype=float)
    ref = bootstrap((a, b, t), lambda x, y, z, axis=-1: np.exp(-(x.sum(axis) - y.sum(axis)) / z.sum(axis)),
                    paired=True, vectorized=True, n_resamples=20000, confidence_level=0.9, method="percentile",
                    random_state=np.random.default_rng(1))
    width = ref.confidence_interval.high - ref.confidence_interval.low
    assert ours["ci_low"] == pytest.approx(ref.confidence_interval.low, abs=0.03 * width)
    assert ours["ci_high"] == pytest.approx(ref.confidence_interval.high, abs=0.03 * width)
    assert ours["ci_low"] < ours["ratio"] < ours["ci_high"] < 1


def test_duplicates_are_resampled_as_one_cluster():
    # Cluster bootstrap (Davison & Hinkley 1997, "Bootstrap Methods and their Application", §3.8: resample the
    # independent units, here whole duplicate clusters). Five copies of every document in one cluster carry the
    # information of one document: the interval must equal the de-duplicated set's (same draws: the ratio is
    # unchanged when every unit's sums are multiplied by five), while a per-document bootstrap of the copies would
    # narrow it by about sqrt(5).
    docs = per_document(40, seed=6, shift=0.0)
    rng = np.random.default_rng(7)
    better = [{**d, "pll": d["pll"] * (0.9 + 0.15 * rng.random())} for d in docs]
    frame = {"tokenizer_vocab_sha256": "h", "variant": "token", "max_seq_len": 64}
    unique = paired_ratio({**frame, "per_document": better}, {**frame, "per_document": docs}, 4000, 0.95, 0)

    def copies(ds, clustered):
        return [{**d, "id": f"{d['id']}-{k}", **({"cluster": i} if clustered else {})}
                for i, d in enumerate(ds) for k in range(5)]

    clustered = paired_ratio({**frame, "per_document": copies(better, True)},
                             {**frame, "per_document": copies(docs, True)}, 4000, 0.95, 0)
    naive = paired_ratio({**frame, "per_document": copies(better, False)},
                         {**frame, "per_document": copies(docs, False)}, 4000, 0.95, 0)
    assert clustered["resampling_unit"] == "duplicate clusters" and clustered["n_units"] == 40
    assert unique["resampling_unit"] == "documents" and clustered["n_docs"] == 200
    assert clustered["ratio"] == pytest.approx(unique["ratio"], rel=1e-12)
    assert (clustered["ci_low"], clustered["ci_high"]) == pytest.approx((unique["ci_low"], unique["ci_high"]),
                                                                       rel=1e-12)
    width = unique["ci_high"] - unique["ci_low"]
    assert naive["ci_high"] - naive["ci_low"] < 0.6 * width  # what ignoring the clusters would claim


def test_paired_ratio_refuses_different_tokenizers(tmp_path):
    base = {"tokenizer_vocab_sha256": "aaa", "variant": "token", "max_seq_len": 64, "per_document": []}
    other = {**base, "tokenizer_vocab_sha256": "bbb"}
    got = paired_ratio(other, base, 100, 0.95, 0)
    assert not got["comparable"] and "different tokenizers" in got["reason"]


def test_score_folders_with_other_tokenizers_give_a_caution(tmp_path):
    cfg = write_all(tmp_path)
    docs = per_document(10, 1, 0.0)
    write_score(tmp_path / "score" / "adapted-domain", tmp_path / "pretrain" / "final", tmp_path / "prepared", docs,
                vocab_hash="cd" * 32)
    report, _ = collect(cfg)
    assert any("not compared: different tokenizers" in c for c in report["cautions"])
    assert report["verdict"]["pppl"] is None


def test_per_class_f1_and_confusion_by_hand():
    # gold a a b b c; predicted a b b b a -> per class: a P=1/2 R=1/2, b P=2/3 R=1, c P=0 R=0
    # F1 = 2PR/(P+R) (van Rijsbergen 1979): a 0.5, b 0.8, c 0
    gold, pred = list("aabbc"), list("abbba")
    rows = [{"gold": g, "predicted": {"x": [p]}} for g, p in zip(gold, pred)]
    got = per_class(rows, ["a", "b", "c"])["x"]
    assert got["f1_mean"] == pytest.approx([0.5, 0.8, 0.0])
    assert got["confusion"] == [[1, 1, 0], [0, 2, 0], [1, 0, 0]] and got["support"] == [2, 2, 1]


def test_per_class_uses_every_seed(tmp_path):
    cfg = write_all(tmp_path)
    report, _ = collect(cfg)
    base = report["downstream"]["per_class"]["base"]
    assert base["labels"] == LABELS and base["n_runs"] == 2
    assert sum(map(sum, base["confusion"])) == 2 * 12  # 12 test examples × 2 seeds


def test_a_plant_folder_given_as_canary_dir_is_marked_missing(tmp_path):
    from adapt.contracts.manifest import RunFolder

    plant = tmp_path / "planted"
    RunFolder(plant, "canary", {"mode": "plant"}, [], 0).finish()
    report, _ = collect(ReportJob(canary_dir=str(plant), out_dir=str(tmp_path / "r")))
    part = report["memorisation"]
    assert part["state"] == "missing" and "exposure.json is missing" in part["note"] and "mode=audit" in part["note"]
    assert [s["key"] for s in report["sources"]].count("canary_dir") == 1
    report, _ = collect(ReportJob(compare_dir=None, prepared_dir=str(write_prepared(tmp_path / "p")),
                                  out_dir=str(tmp_path / "r2")))
    assert "canary_dir" not in [s["key"] for s in report["sources"]]  # an optional stage not given is not listed
