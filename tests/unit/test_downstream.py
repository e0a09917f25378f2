"""Unit tests of task reading, the mean-pooling classifier, fine-tuning determinism and the TF-IDF arm."""

from __future__ import annotations

import json
from pathlib import Path

import numpy as np
import pytest
import torch
from sklearn.feature_extraction.text import TfidfVectorizer
from sklearn.linear_model import LogisticRegression
from sklearn.metrics import accuracy_score, f1_score

from adapt.config.common import RuntimeConfig
from adapt.config.compare import FinetuneConfig
from adapt.evaluation.finetune import check_checkpoint, finetune, load_classifier, mean_pool, score, tfidf_baseline
from adapt.common.errors import InputError
from adapt.contracts.labelled_task import read_task
from tests.conftest import TINY_WORDS, build_tiny_encoder

LEGAL = "court tenant landlord notice contract clause appeal judgment claim rent".split()
CLINICAL = "patient ward dose nurse scan report".split()
FILLER = [w for w in TINY_WORDS if w not in LEGAL + CLINICAL]


def make_task(folder: Path, sizes=(40, 20, 30), seed: int = 0, fmt: str = "jsonl") -> Path:
    """A two-class task from the tiny vocabulary: each class has its own words, mixed with filler words."""
    rng = np.random.default_rng(seed)
    folder.mkdir(parents=True, exist_ok=True)
    for split, n in zip(("train", "dev", "test"), sizes):
        rows = []
        for i in range(n):
            label = ("legal", "clinical")[i % 2]
            own = LEGAL if label == "legal" else CLINICAL
            words = list(rng.choice(own, 3)) + list(rng.choice(FILLER, 4))
            rng.shuffle(words)
            rows.append({"text": " ".join(words), "label": label})
        if fmt == "jsonl":
            (folder / f"{split}.jsonl").write_text("".join(json.dumps(r) + "\n" for r in rows), encoding="utf-8")
        else:
            lines = ["body,category"] + [f"{r['text']},{r['label']}" for r in rows]
            (folder / f"{split}.csv").write_text("\n".join(lines) + "\n", encoding="utf-8")
    return folder


RUNTIME = RuntimeConfig(device="cpu", progress=False)


@pytest.fixture(autouse=True)
def one_thread():
    # a model this small runs fastest on one thread, and far faster when other jobs share the CPU
    before = torch.get_num_threads()
    torch.set_num_threads(1)
    yield
    torch.set_num_threads(before)


# ---------- task files ----------

def test_read_task_jsonl_and_csv(tmp_path):
    task = read_task(make_task(tmp_path / "j"))
    assert task.labels == ["clinical", "legal"] and task.sizes == {"train": 40, "dev": 20, "test": 30}
    csv_task = read_task(make_task(tmp_path / "c", fmt="csv"), text_field="body", label_field="category")
    assert csv_task.train.texts == task.train.texts and csv_task.test.label_ids == task.test.label_ids


@pytest.mark.parametrize("damage, expected", [
    ("missing_split", "no dev file; add dev.jsonl, dev.csv or dev.tsv"),
    ("missing_field", "no field 'label'"),
    ("unseen_label", "do not occur in train.jsonl"),
    ("one_class", "at least 2 labels"),
    ("bad_json", "not valid JSON"),
])
def test_read_task_errors_are_one_clear_line(tmp_path, damage, expected):
    folder = make_task(tmp_path / "t")
    before = {p.name: p.read_bytes() for p in folder.iterdir()}
    if damage == "missing_split":
        (folder / "dev.jsonl").unlink()
        before.pop("dev.jsonl")
    elif damage == "missing_field":
        (folder / "test.jsonl").write_text('{"text": "the court", "category": "legal"}\n')
    elif damage == "unseen_label":
        (folder / "test.jsonl").write_text('{"text": "the court", "label": "tax"}\n')
    elif damage == "one_class":
        (folder / "train.jsonl").write_text('{"text": "the court", "label": "legal"}\n' * 3)
    else:
        (folder / "dev.jsonl").write_text('{"text": "the court", "label": \n')
    before = {p.name: p.read_bytes() for p in folder.iterdir()}
    with pytest.raises(InputError) as err:
        read_task(folder)
    message = str(err.value)
    assert expected in message and "\n" not in message and str(folder) in message
    assert {p.name: p.read_bytes() for p in folder.iterdir()} == before  # inputs never modified


def test_read_task_missing_folder(tmp_path):
    with pytest.raises(InputError, match="folder does not exist"):
        read_task(tmp_path / "nowhere")


# ---------- classifier ----------

def test_mean_pool_ignores_padding_positions():
    torch.manual_seed(0)
    hidden = torch.randn(2, 5, 4)
    mask = torch.tensor([[1, 1, 1, 0, 0], [1, 1, 1, 1, 1]])
    noisy = hidden.clone()
    noisy[0, 3:] = 1e3  # whatever sits at padded positions must not matter
    expected = torch.stack([hidden[0, :3].mean(0), hidden[1].mean(0)])
    torch.testing.assert_close(mean_pool(noisy, mask), expected)


def test_classifier_output_unchanged_by_extra_padding(tiny_encoder):
    model, tok = load_classifier(str(tiny_encoder), num_labels=3, dropout=0.1, seed=0)
    model.eval()
    texts = ["the court and the tenant", "dose"]
    short = tok(texts, padding=True, return_tensors="pt")
    long = tok(texts, padding="max_length", max_length=40, return_tensors="pt")
    assert long["input_ids"].shape[1] > short["input_ids"].shape[1]
    with torch.no_grad():
        a = model(short["input_ids"], short["attention_mask"])
        b = model(long["input_ids"], long["attention_mask"])
    torch.testing.assert_close(a, b, atol=1e-5, rtol=1e-5)


def test_head_init_depends_on_seed_only_not_on_arm(tmp_path):
    enc_a = build_tiny_encoder(tmp_path / "a", seed=0)
    enc_b = build_tiny_encoder(tmp_path / "b", seed=1)
    ma, _ = load_classifier(str(enc_a), 4, 0.1, seed=7, arm="base")
    mb, _ = load_classifier(str(enc_b), 4, 0.1, seed=7, arm="adapted")
    mc, _ = load_classifier(str(enc_a), 4, 0.1, seed=8, arm="base")
    assert not torch.equal(ma.body.embeddings.word_embeddings.weight, mb.body.embeddings.word_embeddings.weight)
    assert torch.equal(ma.head.weight, mb.head.weight) and torch.equal(ma.head.bias, mb.head.bias)
    assert not torch.equal(ma.head.weight, mc.head.weight)


def test_load_classifier_bad_folder_names_the_arm(tmp_path):
    (tmp_path / "empty").mkdir()
    with pytest.raises(InputError, match=r"arms\.adapted="):
        load_classifier(str(tmp_path / "empty"), 2, 0.1, seed=0, arm="adapted")
    with pytest.raises(InputError, match=r"arms\.adapted="):
        check_checkpoint(str(tmp_path / "empty"), arm="adapted")


# ---------- fine-tuning ----------

def test_finetune_is_deterministic_and_learns(tiny_encoder, tmp_path):
    task = read_task(make_task(tmp_path / "task"))
    cfg = FinetuneConfig(learning_rate=3e-3, epochs=4, batch_size=8, warmup_share=0.1)
    first = finetune(str(tiny_encoder), task, cfg, 32, seed=3, runtime=RUNTIME)
    again = finetune(str(tiny_encoder), task, cfg, 32, seed=3, runtime=RUNTIME)
    other = finetune(str(tiny_encoder), task, cfg, 32, seed=4, runtime=RUNTIME)
    assert first.test_predictions == again.test_predictions and first.history == again.history
    assert first.history != other.history
    # metrics agree with scikit-learn on the returned predictions
    assert first.test_accuracy == accuracy_score(task.test.label_ids, first.test_predictions)
    assert first.test_macro_f1 == f1_score(task.test.label_ids, first.test_predictions, average="macro")
    # class words separate the classes: a working loop beats chance (0.5) clearly; loss falls
    assert first.test_accuracy >= 0.8
    assert first.history[-1]["train_loss"] < first.history[0]["train_loss"]
    # best_dev selection: the earliest epoch with the highest dev macro-F1
    dev = [h["dev_macro_f1"] for h in first.history]
    assert first.selected_epoch == int(np.argmax(dev)) + 1 and first.dev_macro_f1 == max(dev)


def test_finetune_select_last_epoch(tiny_encoder, tmp_path):
    task = read_task(make_task(tmp_path / "task", sizes=(16, 8, 8)))
    cfg = FinetuneConfig(learning_rate=1e-3, epochs=2, batch_size=8, select_epoch="last")
    res = finetune(str(tiny_encoder), task, cfg, 32, seed=0, runtime=RUNTIME)
    assert res.selected_epoch == 2 and res.epochs_run == 2 and res.dev_macro_f1 == res.history[-1]["dev_macro_f1"]


# ---------- TF-IDF arm ----------

def test_tfidf_baseline_matches_direct_scikit_learn_fit(tmp_path):
    task = read_task(make_task(tmp_path / "task"))
    res = tfidf_baseline(task, [0.1, 1.0, 10.0])
    assert res.details["C"] in (0.1, 1.0, 10.0)
    # reference: the same pipeline written directly with scikit-learn (TfidfVectorizer + LogisticRegression)
    vec = TfidfVectorizer(ngram_range=(1, 2), sublinear_tf=True)
    clf = LogisticRegression(C=res.details["C"], max_iter=5000).fit(vec.fit_transform(task.train.texts),
                                                                     task.train.label_ids)
    assert res.test_predictions == clf.predict(vec.transform(task.test.texts)).tolist()
    assert res.test_accuracy >= 0.9  # class words are disjoint, so a linear bag-of-words model separates them


def test_score_worked_example():
    # scikit-learn f1_score documentation example: y_true=[0,1,2,0,1,2], y_pred=[0,2,1,0,0,1],
    # macro-F1 = 0.26666..., accuracy 2/6
    acc, f1 = score([0, 1, 2, 0, 1, 2], [0, 2, 1, 0, 0, 1], 3)
    assert acc == pytest.approx(1 / 3) and f1 == pytest.approx(0.26666, abs=1e-4)


def test_a_test_set_without_a_label_is_refused_unless_allowed(tmp_path, caplog):
    # every metric averages over the task's label set: a test set lacking a label cannot measure it
    folder = make_task(tmp_path / "task")
    test = folder / "test.jsonl"
    rows = [json.loads(line) for line in test.read_text().splitlines()]
    dropped = rows[0]["label"]
    test.write_text("".join(json.dumps(r) + "\n" for r in rows if r["label"] != dropped))
    before = test.read_bytes()
    with pytest.raises(InputError) as err:
        read_task(folder)
    message = str(err.value)
    assert str(test) in message and repr(dropped) in message and "allow_missing_test_labels" in message
    assert "\n" not in message and test.read_bytes() == before
    with caplog.at_level("WARNING"):
        task = read_task(folder, allow_missing_test_labels=True)
    assert dropped in task.labels and any("F1 = 0" in r.getMessage() for r in caplog.records)
