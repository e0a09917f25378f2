"""The prepare stage end to end on a small invented corpus with planted defects."""

from __future__ import annotations

import gzip
import hashlib
import json
import random
from pathlib import Path

import pyarrow as pa
import pyarrow.parquet as pq
import pytest
from stdnum import iban as std_iban

from adapt.config.prepare import PrepareJob, PrepareRuntimeConfig
from adapt.stages.prepare import run
from adapt.common.errors import InputError
from adapt.contracts.prepared_corpus import read_prepared

WORDS = ("tenant landlord notice rent arrears court hearing judgment appeal contract clause breach damages claim "
         "evidence witness order deposit lease repair covenant tribunal possession months payment party agent "
         "inspection property occupier surveyor schedule").split()
STOP = "the of and to a in is was for on by with that this it as at from".split()
FOOTER = "This message is confidential and intended only for the addressee named above; Quillon & Vey LLP."


def _prose(rng: random.Random, n_sent: int = 8) -> str:
    sents = []
    for _ in range(n_sent):
        words = [rng.choice(WORDS if rng.random() < 0.55 else STOP) for _ in range(rng.randint(9, 16))]
        sents.append(" ".join(words).capitalize() + ".")
    return " ".join(sents[:4]) + "\n\n" + " ".join(sents[4:])


def _edit(rng: random.Random, text: str, n: int) -> str:
    words = text.split(" ")
    for i in rng.sample(range(len(words)), n):
        words[i] = rng.choice(WORDS)
    return " ".join(words)


def build_corpus(root: Path, seed: int = 0) -> dict:
    """Inputs, gold set, general text and task folder; returns what was planted."""
    rng = random.Random(seed)
    inp = root / "in"
    (inp / "sub").mkdir(parents=True)
    docs = [{"id": f"d{i}", "text": _prose(rng)} for i in range(90)]
    for d in docs[:14]:
        d["text"] += "\n" + FOOTER
    docs += [{"id": f"x{i}", "text": docs[i]["text"]} for i in range(3)]  # exact copies
    near = [(f"d{10 + i}", f"n{i}") for i in range(5)]
    docs += [{"id": f"n{i}", "text": _edit(rng, docs[10 + i]["text"], 3)} for i in range(5)]
    bban = "12345678901234567890"
    iban = "ES" + std_iban.calc_check_digits("ES00" + bban) + bban  # check digits from python-stdnum
    docs[20]["text"] += "\nPlease write to marta.quell@example.test or pay into " + iban + "."
    docs.append({"id": "short", "text": "Tenant paid rent."})
    docs.append({"id": "cyrillic", "text": "Арендатор оплатил аренду за три месяца вперёд. " * 8})
    docs.append({"id": "spam", "text": " ".join(rng.choice(["rent", "cheap", "deposit"]) for _ in range(80))})
    docs.append({"id": "french", "text": "Le locataire doit payer le loyer le premier jour de chaque mois. Le bailleur "
                                         "a délivré un congé pour vendre, que le locataire conteste devant le "
                                         "tribunal judiciaire au motif que le prix proposé est excessif."})
    task_text = " ".join(_prose(rng, 3).split()[:40])
    docs.append({"id": "leak", "text": _prose(rng, 4) + " " + task_text + " " + _prose(rng, 4)})
    with open(inp / "main.jsonl", "w", encoding="utf-8") as fh:
        for d in docs[:60]:
            fh.write(json.dumps(d) + "\n")
    with gzip.open(inp / "sub" / "more.jsonl.gz", "wt", encoding="utf-8") as fh:
        for d in docs[60:]:
            fh.write(json.dumps(d) + "\n")
    (inp / "sub" / "page.txt").write_text("<html><body><nav>Home</nav><p>" + _prose(rng) + "</p></body></html>")
    (inp / "sub" / "legacy.txt").write_bytes(("Señor Pérez’s lease. " + _prose(rng)).encode("cp1252"))
    pq.write_table(pa.table({"id": ["p0"], "text": [_prose(rng)]}), inp / "table.parquet")
    (inp / "logo.png").write_bytes(b"\x89PNG\r\n\x1a\n\x00\x00\x00\rIHDR")
    gold = root / "gold.jsonl"
    rows = [{"text": _prose(rng), "label": "good"} for _ in range(20)]
    rows += [{"text": " ".join(rng.choice(WORDS[:3]) for _ in range(60)), "label": "poor"} for _ in range(10)]
    rows += [{"text": "\n".join(str(rng.randint(0, 999)) for _ in range(40)), "label": "poor"} for _ in range(10)]
    gold.write_text("\n".join(json.dumps(r) for r in rows) + "\n")
    general = root / "general"
    general.mkdir()
    general_words = "people weather music garden holiday family school football recipe travel".split()
    (general / "g.jsonl").write_text("\n".join(json.dumps({"text": " ".join(
        rng.choice(general_words + STOP + WORDS[:5]) for _ in range(60))}) for _ in range(30)) + "\n")
    tasks = root / "tasks"
    tasks.mkdir()
    (tasks / "test.jsonl").write_text(json.dumps({"id": "t1", "text": task_text, "label": "x"}) + "\n"
                                      + json.dumps({"id": "t2", "text": _prose(rng, 3), "label": "y"}) + "\n")
    (tasks / "train.jsonl").write_text(json.dumps({"id": "t3", "text": _prose(rng, 3), "label": "x"}) + "\n")
    footer_docs = sum(FOOTER in d["text"].split("\n") for d in docs)  # copies carry it too, unless edited
    return {"near": near, "exact": [(f"d{i}", f"x{i}") for i in range(3)], "iban": iban, "footer_docs": footer_docs}


def _config(root: Path, out: str, num_proc: int = 1, **kw) -> PrepareJob:
    cfg = PrepareJob(inputs=[str(root / "in")], out_dir=str(root / out),
                     runtime=PrepareRuntimeConfig(num_proc=num_proc, progress=False), **kw)
    cfg.quality.gold_path = str(root / "gold.jsonl")
    cfg.profile.general_path = str(root / "general")
    cfg.contamination.task_dir = str(root / "tasks")
    return cfg


def _hashes(folder: Path) -> dict[str, str]:
    return {str(p): hashlib.sha256(p.read_bytes()).hexdigest() for p in sorted(folder.rglob("*")) if p.is_file()}


@pytest.fixture(scope="module")
def prepared(tmp_path_factory):
    root = tmp_path_factory.mktemp("prep")
    planted = build_corpus(root)
    before = _hashes(root / "in")
    result = run(_config(root, "out"))
    return root, planted, result, before


def test_output_contract(prepared):
    root, _, result, before = prepared
    out = root / "out"
    assert _hashes(root / "in") == before  # inputs untouched
    train, held = read_prepared(out, "train"), read_prepared(out, "heldout")
    assert len(train) > 50 and len(held) >= 5
    assert {"id", "text", "source", "quality", "cluster_id", "cluster_size", "words"} <= set(train[0])
    assert all(0.0 <= r["quality"] <= 1.0 for r in train + held)
    assert not {r["cluster_id"] for r in train} & {r["cluster_id"] for r in held}
    removed = pq.read_table(out / "removed.parquet")
    assert {"id", "reason", "detail"} <= set(removed.column_names)
    manifest = json.loads((out / "manifest.json").read_text())
    assert manifest["status"] == "completed" and manifest["job"] == "prepare"
    assert set(manifest["inputs"]) == {str(p) for p in (root / "in").rglob("*") if p.is_file()}
    assert not (out / ".work").exists()
    assert "## Duplicates" in (out / "profile.md").read_text() and result["summary"]


def test_planted_defects_are_found(prepared):
    root, planted, result, _ = prepared
    p = json.loads((root / "out" / "profile.json").read_text())
    reasons = {r: v["count"] for r, v in p["removed"].items()}
    assert reasons["exact_duplicate"] == 3 and reasons["near_duplicate"] == 5
    assert reasons["too_short"] == 1 and reasons["charset"] == 1 and reasons["contamination"] == 1
    assert reasons["wrong_language"] == 1  # Latin script, so only the language check can catch it
    assert reasons["low_quality"] >= 1  # the keyword spam
    removed = pq.read_table(root / "out" / "removed.parquet").to_pylist()
    by_id = {r["id"]: r["reason"] for r in removed}
    assert by_id["cyrillic"] == "charset" and by_id["leak"] == "contamination" and by_id["spam"] == "low_quality"
    assert by_id["french"] == "wrong_language"
    li = p["language_id"]
    assert li["identified_as"] == {"fr": 1} and li["removed_share"] == pytest.approx(1 / li["checked"])
    assert "## Language" in (root / "out" / "profile.md").read_text()
    dups = {i for i, r in by_id.items() if r.endswith("duplicate")}
    assert len(dups) == 8 and all(len({a, b} & dups) == 1 for a, b in planted["near"] + planted["exact"])
    assert p["duplicates"]["duplicate_share"] == pytest.approx(8 / p["duplicates"]["docs_checked"])
    assert p["cleaning"]["boilerplate"]["lines_removed"] == planted["footer_docs"] >= 14
    assert p["cleaning"]["docs_with_markup"] == 1
    assert p["inputs"]["files_skipped"] and sum(p["inputs"]["fallback_decoded"].values()) == 1
    assert p["personal_data"]["findings"]["email"] == 1 and p["personal_data"]["findings"]["iban"] == 1
    texts = " ".join(r["text"] for r in read_prepared(root / "out", "train") + read_prepared(root / "out", "heldout"))
    assert planted["iban"] not in texts and "marta.quell" not in texts and "[IBAN]" in texts
    assert FOOTER not in texts
    assert p["contamination"]["splits"]["test"]["found_in_corpus"] == 1
    q = p["quality"]
    assert q["kind"] == "classifier" and q["cv_accuracy"] > q["majority_baseline_accuracy"]
    tok = p["tokenizer"]
    assert 1.0 <= tok["corpus"]["fertility"] < 3.0 and tok["general"]["fertility"] >= 1.0
    assert 0.0 < p["unigram_overlap"]["overlap"] < 1.0
    funnel = [f["docs"] for f in p["funnel"]]
    assert funnel == sorted(funnel, reverse=True) and funnel[0] == p["totals"]["docs_read"]
    assert funnel[-1] == p["totals"]["docs_kept"]


def test_same_result_with_two_processes_and_split_by_cluster_without_removal(prepared, tmp_path):
    root, planted, _, _ = prepared
    run(_config(root, "out2", num_proc=2, chunk_docs=16))
    for split in ("train", "heldout"):
        one = [(r["id"], r["text"], r["cluster_id"]) for r in read_prepared(root / "out", split)]
        two = [(r["id"], r["text"], r["cluster_id"]) for r in read_prepared(root / "out2", split)]
        assert one == two
    cfg = _config(root, "out3")
    cfg.dedup.remove = False
    run(cfg)
    side = {r["id"]: s for s in ("train", "heldout") for r in read_prepared(root / "out3", s)}
    for a, b in planted["near"] + planted["exact"]:
        assert side[a] == side[b]  # near duplicates never straddle the split


@pytest.mark.parametrize("key,value,needle", [
    ("quality.gold_path", "missing.jsonl", "quality.gold_path="),
    ("contamination.task_dir", "no_tasks", "contamination.task_dir="),
    ("profile.general_path", "no_general", "profile.general_path="),
])
def test_missing_setting_paths_fail_before_any_output(tmp_path, key, value, needle):
    (tmp_path / "in").mkdir()
    (tmp_path / "in" / "a.txt").write_text("tenant paid the rent " * 10)
    cfg = PrepareJob(inputs=[str(tmp_path / "in")], out_dir=str(tmp_path / "out"), runtime=PrepareRuntimeConfig(progress=False))
    cfg.quality.gold_path = cfg.profile.general_path = None
    section, field = key.split(".")
    setattr(getattr(cfg, section), field, str(tmp_path / value))
    with pytest.raises(InputError, match=needle):
        run(cfg)
    assert not (tmp_path / "out").exists()
