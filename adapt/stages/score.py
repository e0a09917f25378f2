"""The score stage: exact pseudo-perplexity of one checkpoint on one text set, with a bootstrap interval.

Writes ``scores.json`` and ``manifest.json`` into ``cfg.out_dir``. Pseudo-perplexity depends on the tokenizer
(a different vocabulary cuts the same text into different pieces), so ``scores.json`` records a hash of the
vocabulary: only compare figures whose hashes match.
"""

from __future__ import annotations

import logging
from pathlib import Path

import numpy as np
import torch
from transformers import PreTrainedTokenizerBase

from adapt.config.common import PACKAGED_ENCODER
from adapt.config.score import ScoreJob
from adapt.training.encoder import HeadReport, load_mlm, load_tokenizer, vocab_sha256
from adapt.common.errors import InputError
from adapt.evaluation.pppl import DocScores, bootstrap_ci, pseudo_perplexity, score_documents
from adapt.contracts.manifest import RunFolder
from adapt.common.io import atomic_write_json
from adapt.common.runtime import apply_threads, resolve_device, resolve_precision
from adapt.contracts.model_folder import resolve_model_folder
from adapt.contracts.prepared_corpus import read_texts

log = logging.getLogger(__name__)

MIN_DOCS_FOR_CI = 10  # below this a bootstrap over documents says little; we still report it, with a warning


def _refuse_untrained_head(cfg: ScoreJob, report: HeadReport) -> None:
    if not report.needs_warmup or cfg.allow_untrained_head:
        return
    hint = ("score the base/ folder that the pretrain job writes after warming up the head "
            "(encoder.name_or_path=<pretrain out_dir>/base)")
    raise InputError(f"encoder.name_or_path={cfg.encoder.name_or_path}: the MLM head is untrained "
                     f"({len(report.missing)} weights initialised at random, e.g. {report.missing[0]}), so its "
                     f"pseudo-perplexity is meaningless; {hint}, or set allow_untrained_head=true to measure anyway")


def select_documents(docs: list[dict], max_docs: int, max_tokens: int, seed: int) -> list[dict]:
    """With a limit set, documents in a seeded random order (the first max_docs); else all, in file order.

    The token budget itself is applied while scoring, along this order.
    """
    if not max_docs and not max_tokens:
        return docs
    order = np.random.default_rng(seed).permutation(len(docs))
    if max_docs:
        order = order[:max_docs]
    return [docs[i] for i in order]


def _interval(scores: DocScores, cfg: ScoreJob) -> dict:
    ci = {"confidence": cfg.ci.confidence, "low": None, "high": None,
          "bootstrap_resamples": cfg.ci.bootstrap_resamples}
    if cfg.ci.bootstrap_resamples == 0:
        return ci
    if len(scores.tokens) < MIN_DOCS_FOR_CI:
        log.warning("only %d documents scored: the bootstrap interval over documents is unreliable; "
                    "score more documents (max_docs, max_tokens)", len(scores.tokens))
    ci["low"], ci["high"] = bootstrap_ci(scores.pll, scores.tokens, cfg.ci.bootstrap_resamples, cfg.seed,
                                        cfg.ci.confidence)
    return ci


def _summary(result: dict) -> list[str]:
    ci = result["ci"]
    band = (f" ({ci['confidence']:.0%} CI {ci['low']:,.2f}–{ci['high']:,.2f})" if ci["low"] is not None else "")
    return [f"pseudo-perplexity {result['pseudo_perplexity']:,.2f}{band} on {result['total_tokens']:,} tokens "
            f"of {result['n_docs']:,} documents",
            f"variant {result['variant']}, {result['tokens_per_second']:,.1f} tokens/s; "
            f"written to {Path(result['out_dir']) / 'scores.json'}"]


def run(cfg: ScoreJob) -> dict:
    """Score cfg.encoder on cfg.texts; write scores.json and manifest.json; return the result with a summary."""
    apply_threads(cfg.runtime)
    texts_path = Path(cfg.texts)
    docs = read_texts(texts_path, cfg.split)  # raises InputError naming the path
    device = resolve_device(cfg.runtime)
    precision = resolve_precision(cfg.runtime, device)
    encoder_path = resolve_model_folder(cfg.encoder.name_or_path, "encoder.name_or_path")
    inputs = [texts_path] + ([] if cfg.encoder.name_or_path == PACKAGED_ENCODER else [encoder_path])
    folder = RunFolder(cfg.out_dir, "score", cfg, inputs=[p for p in inputs if Path(p).exists()], seed=cfg.seed)
    try:
        tokenizer = load_tokenizer(cfg.encoder)
        with torch.random.fork_rng():  # head weights missing from the checkpoint are drawn reproducibly
            torch.manual_seed(cfg.seed)
            model, report = load_mlm(cfg.encoder, encoder_path)
        _refuse_untrained_head(cfg, report)
        if cfg.encoder.random_init:
            log.warning("encoder.random_init=true: scoring a randomly initialised model; the figure checks the "
                        "plumbing only")
        chosen = select_documents(docs, cfg.max_docs, cfg.max_tokens, cfg.seed)
        vocab_hash = vocab_sha256(tokenizer)
        log.warning("pseudo-perplexity depends on the tokenizer: compare it only with figures whose "
                    "tokenizer_vocab_sha256 is %s…", vocab_hash[:12])
        scores = score_documents(model.to(device), tokenizer, [d["text"] for d in chosen],
                                 max_seq_len=cfg.encoder.max_seq_len, batch_size=cfg.batch_size,
                                 variant=cfg.variant, precision=precision.precision,
                                 progress=cfg.runtime.progress, max_tokens=cfg.max_tokens,
                                 window_stride=cfg.window_stride)
        if scores.total_tokens == 0:
            raise InputError(f"{texts_path}: no scorable tokens in the chosen documents (only special or unknown "
                             "tokens); check the text field and the tokenizer, or raise max_docs")
        result = _result(cfg, chosen, scores, report, tokenizer, vocab_hash, precision.precision)
        atomic_write_json(Path(cfg.out_dir) / "scores.json", result)
    except BaseException:
        folder.finish(status="failed", precision=precision.record())
        raise
    folder.finish(pseudo_perplexity=result["pseudo_perplexity"], total_tokens=result["total_tokens"],
                  precision=precision.record())
    result["out_dir"] = str(cfg.out_dir)
    result["summary"] = _summary(result)
    return result


def _result(cfg: ScoreJob, chosen: list[dict], scores: DocScores, report: HeadReport,
            tokenizer: PreTrainedTokenizerBase, vocab_hash: str, precision: str) -> dict:
    cut_ids = [chosen[i]["id"] for i in np.flatnonzero(scores.cut)]
    if cut_ids:
        log.info("document %s was cut to keep within max_tokens=%d", cut_ids[0], cfg.max_tokens)
    if scores.skipped_special:
        log.info("%d special or unknown tokens inside the texts were not scored", scores.skipped_special)
    return {
        "encoder": cfg.encoder.name_or_path,
        "texts": cfg.texts,
        "split": cfg.split,
        "variant": cfg.variant,
        "pseudo_perplexity": pseudo_perplexity(scores),
        "ci": _interval(scores, cfg),
        "total_tokens": scores.total_tokens,
        "n_docs": len(scores.tokens),
        "tokens_per_second": scores.total_tokens / max(scores.seconds, 1e-9),
        "max_seq_len": cfg.encoder.max_seq_len,
        "window_stride": scores.window_stride,
        "windows": scores.n_windows,
        "precision": precision,
        "skipped_special_tokens": scores.skipped_special,
        "untrained_head": report.needs_warmup or cfg.encoder.random_init,
        "tokenizer": {"class": type(tokenizer).__name__, "vocab_size": len(tokenizer)},
        "tokenizer_vocab_sha256": vocab_hash,
        "per_document": [{"id": chosen[i]["id"], "tokens": int(scores.tokens[i]), "pll": float(scores.pll[i]),
                          "cut": bool(scores.cut[i]),
                          **({"cluster": chosen[i]["cluster"]} if "cluster" in chosen[i] else {})}
                         for i in range(len(scores.tokens))],
    }
