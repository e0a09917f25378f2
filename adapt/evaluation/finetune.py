"""Fine-tune and evaluate a sequence classifier from any encoder checkpoint; TF-IDF + linear baseline.

Every arm starts from the same kind of point: the encoder body only (``AutoModel``, so an MLM head or a
pooler in the checkpoint is ignored), mean pooling over non-padding tokens, dropout and a linear head whose
initial weights depend on the seed alone. An MLM checkpoint has no trained pooler, so using the pooler would
favour whichever arm happened to keep one.

A multi-label task (``Task.multi_label``) trains the same head as independent sigmoid outputs (binary
cross-entropy on logits). A label is predicted when its probability is at least one decision threshold, chosen
per epoch on dev from THRESHOLDS (the highest dev macro-F1, the smallest threshold on ties); the selected
epoch's threshold is applied to test and to every further test set. The TF-IDF arm does the same on the
probabilities of one-vs-rest logistic regressions. Metrics follow scikit-learn on label-indicator matrices:
"accuracy" is exact-match (subset) accuracy, macro-F1 averages the per-label F1 over the task's labels.
"""

from __future__ import annotations

import functools
import logging
import math
import time
from dataclasses import dataclass, field

import numpy as np
import torch
from sklearn.feature_extraction.text import TfidfVectorizer
from sklearn.linear_model import LogisticRegression
from sklearn.metrics import accuracy_score, f1_score
from sklearn.multiclass import OneVsRestClassifier
from tqdm.auto import tqdm
from transformers import PreTrainedTokenizerBase

from adapt.config.common import RuntimeConfig
from adapt.config.compare import FinetuneConfig
from adapt.common.runtime import autocast_context, resolve_device
from adapt.contracts.labelled_task import Task
from adapt.evaluation.significance import indicator_matrix
from adapt.training.encoder import check_loadable, load_body, open_tokenizer
from adapt.training.optimizer import build_adamw

log = logging.getLogger(__name__)

# decision thresholds tried on dev for a multi-label task: 0.05, 0.10, ..., 0.95
THRESHOLDS = tuple(round(0.05 * k, 2) for k in range(1, 20))


@dataclass
class ArmResult:
    """Dev/test metrics of one fine-tuning run (or of the TF-IDF arm) and its test predictions (label ids; a
    sorted list of label ids per example in a multi-label task)."""

    seed: int | None
    dev_accuracy: float
    dev_macro_f1: float
    test_accuracy: float
    test_macro_f1: float
    test_predictions: list
    test_gold: list
    epochs_run: int = 0
    selected_epoch: int = 0
    seconds: float = 0.0
    history: list[dict] = field(default_factory=list)
    details: dict = field(default_factory=dict)
    # per further test set (Task.other_tests): predictions, and {"accuracy", "macro_f1"}
    other_predictions: dict[str, list] = field(default_factory=dict)
    other_metrics: dict[str, dict[str, float]] = field(default_factory=dict)

    def row(self) -> dict:
        """The per-seed record written to comparison.json."""
        return {"seed": self.seed, "dev_accuracy": self.dev_accuracy, "dev_macro_f1": self.dev_macro_f1,
                "test_accuracy": self.test_accuracy, "test_macro_f1": self.test_macro_f1,
                "epochs_run": self.epochs_run, "selected_epoch": self.selected_epoch,
                "seconds": round(self.seconds, 2), **self.details,
                **({"other_tests": self.other_metrics} if self.other_metrics else {})}


def _score_others(task: Task, predict_texts) -> tuple[dict, dict]:  # noqa: ANN001 - texts -> label ids
    """(predictions, metrics) of every further test set of the task."""
    preds = {name: predict_texts(split.texts) for name, split in task.other_tests.items()}
    metrics = {name: task_metrics(task, task.other_tests[name].label_ids, p) for name, p in preds.items()}
    return preds, {name: {k: v for k, v in m.items() if k != "per_label_f1"} for name, m in metrics.items()}


def score(gold: list[int], pred: list[int], n_labels: int) -> tuple[float, float]:
    """(accuracy, macro-F1) with scikit-learn; macro-F1 averages over the task's fixed label set 0..n_labels-1,
    so every arm and split is averaged over the same labels."""
    return float(accuracy_score(gold, pred)), float(f1_score(gold, pred, labels=list(range(n_labels)),
                                                              average="macro", zero_division=0))


def score_multilabel(gold: list[list[int]], pred: list[list[int]], n_labels: int) -> dict:
    """Metrics of a multi-label task with scikit-learn on label-indicator matrices over the fixed label set:
    exact-match (subset) accuracy, macro- and micro-F1 and the per-label F1 (zero_division=0)."""
    g, q = indicator_matrix(gold, n_labels), indicator_matrix(pred, n_labels)
    labels = list(range(n_labels))
    return {"accuracy": float(accuracy_score(g, q)),
            "macro_f1": float(f1_score(g, q, labels=labels, average="macro", zero_division=0)),
            "micro_f1": float(f1_score(g, q, labels=labels, average="micro", zero_division=0)),
            "per_label_f1": [float(v) for v in f1_score(g, q, labels=labels, average=None, zero_division=0)]}


def task_metrics(task: Task, gold: list, pred: list) -> dict:
    """{"accuracy", "macro_f1"} of predictions on one of the task's splits, and for a multi-label task also
    "micro_f1" and "per_label_f1"."""
    if task.multi_label:
        return score_multilabel(gold, pred, len(task.labels))
    return dict(zip(("accuracy", "macro_f1"), score(gold, pred, len(task.labels))))


def thresholded(probs: np.ndarray, threshold: float) -> list[list[int]]:
    """Per example, the ids of the labels whose probability is at least ``threshold``. (n, C) -> n lists."""
    return [np.flatnonzero(row >= threshold).tolist() for row in np.asarray(probs)]


def choose_threshold(gold: list[list[int]], probs: np.ndarray, n_labels: int) -> tuple[float, dict]:
    """The THRESHOLDS value with the highest macro-F1 of ``probs`` against ``gold`` (the smallest on ties), and
    the metrics at it."""
    g, labels = indicator_matrix(gold, n_labels), list(range(n_labels))
    best_t, best_f1 = THRESHOLDS[0], -1.0
    for t in THRESHOLDS:
        f1 = float(f1_score(g, (np.asarray(probs) >= t).astype(np.int64), labels=labels, average="macro",
                            zero_division=0))
        if f1 > best_f1:
            best_t, best_f1 = t, f1
    return best_t, score_multilabel(gold, thresholded(probs, best_t), n_labels)


def mean_pool(hidden: torch.Tensor, attention_mask: torch.Tensor) -> torch.Tensor:
    """Average of the token vectors where attention_mask is 1, in fp32. (B, T, H), (B, T) -> (B, H)."""
    mask = attention_mask.unsqueeze(-1).float()
    return (hidden.float() * mask).sum(dim=1) / mask.sum(dim=1).clamp(min=1.0)


class MeanPoolClassifier(torch.nn.Module):
    """Encoder body + mean pooling + dropout + linear head; the head's initial weights depend on ``seed`` only."""

    def __init__(self, body: torch.nn.Module, num_labels: int, dropout: float, seed: int):
        super().__init__()
        self.body = body
        hidden = int(body.config.hidden_size)
        self.dropout = torch.nn.Dropout(dropout)
        self.head = torch.nn.Linear(hidden, num_labels)
        # BERT-style init, N(0, initializer_range), from a generator of its own: identical for every arm
        gen = torch.Generator().manual_seed(int(seed))
        std = float(getattr(body.config, "initializer_range", 0.02))
        with torch.no_grad():
            self.head.weight.copy_(torch.randn(self.head.weight.shape, generator=gen) * std)
            self.head.bias.zero_()

    def forward(self, input_ids: torch.Tensor, attention_mask: torch.Tensor) -> torch.Tensor:
        hidden = self.body(input_ids=input_ids, attention_mask=attention_mask).last_hidden_state  # (B, T, H)
        return self.head(self.dropout(mean_pool(hidden, attention_mask)))  # (B, num_labels)


def check_checkpoint(checkpoint: str, arm: str = "arm", trust_remote_code: bool = False) -> None:
    """Cheap early check that the tokenizer and config of ``checkpoint`` load (no weights are read)."""
    check_loadable(checkpoint, trust_remote_code, f"arms.{arm}={checkpoint}")


def load_classifier(checkpoint: str, num_labels: int, dropout: float, seed: int, arm: str = "arm",
                    trust_remote_code: bool = False) -> tuple[MeanPoolClassifier, PreTrainedTokenizerBase]:
    """Encoder body of ``checkpoint`` (fp32) under a fresh seeded head, and its tokenizer."""
    tokenizer = open_tokenizer(checkpoint, trust_remote_code, f"arms.{arm}={checkpoint}")
    torch.manual_seed(seed)  # any weight the checkpoint lacks (e.g. an unused pooler) is initialised alike
    body = load_body(checkpoint, trust_remote_code, f"arms.{arm}={checkpoint}")
    torch.manual_seed(seed)
    return MeanPoolClassifier(body, num_labels, dropout, seed), tokenizer


def encode(tokenizer: PreTrainedTokenizerBase, texts: list[str], max_seq_len: int) -> list[list[int]]:
    return tokenizer(list(texts), truncation=True, max_length=max_seq_len)["input_ids"]


def collate(tokenizer: PreTrainedTokenizerBase, ids: list[list[int]]) -> dict[str, torch.Tensor]:
    """Pad a batch to its longest example."""
    batch = tokenizer.pad({"input_ids": ids}, padding=True, return_tensors="pt")
    return {"input_ids": batch["input_ids"], "attention_mask": batch["attention_mask"]}


@torch.no_grad()
def logits_of(model: MeanPoolClassifier, tokenizer: PreTrainedTokenizerBase, ids: list[list[int]], batch_size: int,
              device: torch.device, autocast) -> torch.Tensor:
    """(n, num_labels) fp32 logits in input order; batches are formed by length to pad less (padding does not
    change the output, see mean_pool)."""
    model.eval()
    order = sorted(range(len(ids)), key=lambda i: len(ids[i]))
    out = torch.zeros(len(ids), model.head.out_features)
    for start in range(0, len(order), batch_size):
        rows = order[start:start + batch_size]
        batch = {k: v.to(device) for k, v in collate(tokenizer, [ids[i] for i in rows]).items()}
        with autocast():
            logits = model(**batch)  # (B, num_labels)
        out[rows] = logits.float().cpu()
    return out


def predict(model: MeanPoolClassifier, tokenizer: PreTrainedTokenizerBase, ids: list[list[int]], batch_size: int,
            device: torch.device, autocast) -> list[int]:
    """Predicted label ids (the highest logit) in input order."""
    return logits_of(model, tokenizer, ids, batch_size, device, autocast).argmax(dim=-1).tolist()


def _optimizer(model: torch.nn.Module, cfg: FinetuneConfig, total_steps: int, device: torch.device):
    # the fused kernel made the MiniLM update ~5x faster on CPU (27 vs 145 ms per step, 1 thread)
    opt = build_adamw(model, cfg.learning_rate, cfg.weight_decay, device)
    warmup = int(round(cfg.warmup_share * total_steps))

    def factor(step: int) -> float:  # linear warmup to the peak, then linear decay to 0
        if step < warmup:
            return (step + 1) / warmup
        return max(0.0, (total_steps - step) / max(1, total_steps - warmup))

    return opt, torch.optim.lr_scheduler.LambdaLR(opt, factor)


def finetune(checkpoint: str, task: Task, cfg: FinetuneConfig, max_seq_len: int, seed: int,
             runtime: RuntimeConfig, arm: str = "arm", precision: str = "fp32",
             trust_remote_code: bool = False) -> ArmResult:
    """Fine-tune on train, pick the epoch on dev (``cfg.select_epoch``), evaluate that model on test.

    ``precision`` is the resolved one ("fp32" or "bf16", see ``adapt.common.runtime.resolve_precision``)."""
    started = time.perf_counter()
    device = resolve_device(runtime)
    autocast = functools.partial(autocast_context, precision, device)
    model, tokenizer = load_classifier(checkpoint, len(task.labels), cfg.dropout, seed, arm, trust_remote_code)
    model.to(device)
    train_ids = encode(tokenizer, task.train.texts, max_seq_len)
    dev_ids = encode(tokenizer, task.dev.texts, max_seq_len)
    if task.multi_label:  # 0/1 targets of the sigmoid outputs
        labels = torch.tensor(indicator_matrix(task.train.label_ids, len(task.labels)), dtype=torch.float32)
    else:
        labels = torch.tensor(task.train.label_ids)
    steps_per_epoch = math.ceil(len(train_ids) / cfg.batch_size)
    opt, sched = _optimizer(model, cfg, cfg.epochs * steps_per_epoch, device)
    gen = torch.Generator().manual_seed(int(seed))  # shuffling order
    torch.manual_seed(seed)  # dropout
    best_f1, best_epoch, best_state, history = -1.0, 0, None, []
    bar = tqdm(total=cfg.epochs * steps_per_epoch, desc=f"{arm} seed {seed}", unit="step", leave=False,
               disable=not runtime.progress)
    for epoch in range(1, cfg.epochs + 1):
        model.train()
        order = torch.randperm(len(train_ids), generator=gen).tolist()
        loss_sum = 0.0
        for start in range(0, len(order), cfg.batch_size):
            rows = order[start:start + cfg.batch_size]
            batch = {k: v.to(device) for k, v in collate(tokenizer, [train_ids[i] for i in rows]).items()}
            with autocast():
                logits = model(**batch)  # (B, num_labels)
            if task.multi_label:
                loss = torch.nn.functional.binary_cross_entropy_with_logits(logits.float(), labels[rows].to(device))
            else:
                loss = torch.nn.functional.cross_entropy(logits.float(), labels[rows].to(device))
            opt.zero_grad(set_to_none=True)
            loss.backward()
            if cfg.max_grad_norm > 0:
                torch.nn.utils.clip_grad_norm_(model.parameters(), cfg.max_grad_norm)
            opt.step()
            sched.step()
            loss_sum += loss.item() * len(rows)
            bar.update(1)
        step = {"epoch": epoch, "train_loss": loss_sum / len(order)}
        if task.multi_label:
            probs = torch.sigmoid(logits_of(model, tokenizer, dev_ids, cfg.batch_size * 2, device, autocast))
            step["threshold"], dev = choose_threshold(task.dev.label_ids, probs.numpy(), len(task.labels))
            dev_acc, dev_f1 = dev["accuracy"], dev["macro_f1"]
        else:
            dev_acc, dev_f1 = score(task.dev.label_ids, predict(model, tokenizer, dev_ids, cfg.batch_size * 2,
                                                                device, autocast), len(task.labels))
        history.append({**step, "dev_accuracy": dev_acc, "dev_macro_f1": dev_f1})
        log.info("%s seed %d epoch %d: train loss %.4f, dev accuracy %.3f, dev macro-F1 %.3f",
                 arm, seed, epoch, loss_sum / len(order), dev_acc, dev_f1)
        if cfg.select_epoch == "best_dev" and dev_f1 > best_f1:
            best_f1, best_epoch = dev_f1, epoch
            best_state = {k: v.detach().clone() for k, v in model.state_dict().items()}
    bar.close()
    if cfg.select_epoch == "best_dev" and best_epoch != cfg.epochs:
        model.load_state_dict(best_state)
    selected = best_epoch if cfg.select_epoch == "best_dev" else cfg.epochs
    return _evaluate_selected(model, tokenizer, task, cfg, max_seq_len, seed, device, autocast, history,
                              selected, started)


def _evaluate_selected(model, tokenizer, task: Task, cfg: FinetuneConfig, max_seq_len: int, seed: int,
                       device: torch.device, autocast, history: list[dict], selected: int,
                       started: float) -> ArmResult:
    chosen = history[selected - 1]

    def predict_texts(texts: list[str]) -> list:
        ids = encode(tokenizer, texts, max_seq_len)
        if task.multi_label:  # the selected epoch's dev threshold
            probs = torch.sigmoid(logits_of(model, tokenizer, ids, cfg.batch_size * 2, device, autocast))
            return thresholded(probs.numpy(), chosen["threshold"])
        return predict(model, tokenizer, ids, cfg.batch_size * 2, device, autocast)

    test_pred = predict_texts(task.test.texts)
    test = task_metrics(task, task.test.label_ids, test_pred)
    others, other_metrics = _score_others(task, predict_texts)
    return ArmResult(seed=seed, dev_accuracy=chosen["dev_accuracy"], dev_macro_f1=chosen["dev_macro_f1"],
                     test_accuracy=test["accuracy"], test_macro_f1=test["macro_f1"], test_predictions=test_pred,
                     test_gold=list(task.test.label_ids), epochs_run=len(history), selected_epoch=selected,
                     seconds=time.perf_counter() - started, history=history,
                     details=_multilabel_details(task, chosen.get("threshold"), test), other_predictions=others,
                     other_metrics=other_metrics)


def _multilabel_details(task: Task, threshold: float | None, test: dict) -> dict:
    """The per-seed row's extra fields of a multi-label task: the decision threshold, micro- and per-label F1."""
    if not task.multi_label:
        return {}
    return {"threshold": threshold, "test_micro_f1": test["micro_f1"],
            "test_per_label_f1": dict(zip(task.labels, test["per_label_f1"]))}


def _tfidf_multilabel(task: Task, c_values: list[float], vectorizer, x_train, x_dev, x_test,
                      started: float) -> ArmResult:
    """One-vs-rest logistic regressions; per C the dev threshold rule, then C by dev macro-F1 (smallest on ties)."""
    n = len(task.labels)
    best = None
    for c in sorted(c_values):
        clf = OneVsRestClassifier(LogisticRegression(C=c, max_iter=5000))  # lbfgs per label: deterministic
        clf.fit(x_train, indicator_matrix(task.train.label_ids, n))
        threshold, dev = choose_threshold(task.dev.label_ids, clf.predict_proba(x_dev), n)
        log.info("tfidf C=%g threshold %.2f: dev accuracy %.3f, dev macro-F1 %.3f", c, threshold, dev["accuracy"],
                 dev["macro_f1"])
        if best is None or dev["macro_f1"] > best[2]["macro_f1"]:
            best = (c, threshold, dev, clf)
    c, threshold, dev, clf = best

    def predict_texts(texts: list[str]) -> list[list[int]]:
        return thresholded(clf.predict_proba(vectorizer.transform(texts)), threshold)

    test_pred = thresholded(clf.predict_proba(x_test), threshold)
    test = score_multilabel(task.test.label_ids, test_pred, n)
    others, other_metrics = _score_others(task, predict_texts)
    return ArmResult(seed=None, dev_accuracy=dev["accuracy"], dev_macro_f1=dev["macro_f1"],
                     test_accuracy=test["accuracy"], test_macro_f1=test["macro_f1"], test_predictions=test_pred,
                     test_gold=list(task.test.label_ids), seconds=time.perf_counter() - started,
                     details={"C": c, "features": int(x_train.shape[1]), **_multilabel_details(task, threshold, test)},
                     other_predictions=others, other_metrics=other_metrics)


def tfidf_baseline(task: Task, c_values: list[float]) -> ArmResult:
    """TF-IDF of word 1-2-grams + logistic regression; C chosen by dev macro-F1 (smallest C on ties)."""
    started = time.perf_counter()
    vectorizer = TfidfVectorizer(ngram_range=(1, 2), lowercase=True, sublinear_tf=True)
    x_train = vectorizer.fit_transform(task.train.texts)
    x_dev, x_test = vectorizer.transform(task.dev.texts), vectorizer.transform(task.test.texts)
    if task.multi_label:
        return _tfidf_multilabel(task, c_values, vectorizer, x_train, x_dev, x_test, started)
    best = None
    for c in sorted(c_values):
        clf = LogisticRegression(C=c, max_iter=5000)  # lbfgs: deterministic, no random state involved
        clf.fit(x_train, task.train.label_ids)
        dev_acc, dev_f1 = score(task.dev.label_ids, clf.predict(x_dev).tolist(), len(task.labels))
        log.info("tfidf C=%g: dev accuracy %.3f, dev macro-F1 %.3f", c, dev_acc, dev_f1)
        if best is None or dev_f1 > best[2]:
            best = (c, dev_acc, dev_f1, clf)
    c, dev_acc, dev_f1, clf = best
    test_pred = [int(v) for v in clf.predict(x_test)]
    test_acc, test_f1 = score(task.test.label_ids, test_pred, len(task.labels))
    others, other_metrics = _score_others(task, lambda t: [int(v) for v in clf.predict(vectorizer.transform(t))])
    return ArmResult(seed=None, dev_accuracy=dev_acc, dev_macro_f1=dev_f1, test_accuracy=test_acc,
                     test_macro_f1=test_f1, test_predictions=test_pred, test_gold=list(task.test.label_ids),
                     seconds=time.perf_counter() - started,
                     details={"C": c, "features": int(x_train.shape[1])}, other_predictions=others,
                     other_metrics=other_metrics)

