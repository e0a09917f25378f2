"""The vocab stage: add frequent domain words that the tokenizer cuts into pieces as whole tokens.

Reads a prepared corpus (and optionally a prepared general corpus), counts the tokenizer's words on the training
split, chooses words by the rule in ``cfg.words``, and writes ``model/`` (the encoder with the extended tokenizer and
its embeddings grown, each new row the mean of its pieces' rows), ``vocab_report.json`` (every added word with
its counts and pieces, fertility before and after) and ``manifest.json`` into ``cfg.out_dir``. ``model/`` is what
``adapt-pretrain encoder.name_or_path=<out_dir>`` then trains. An MLM head the checkpoint lacks is not written,
so pretrain still sees it missing and warms it up.
"""

from __future__ import annotations

import logging
from pathlib import Path

import torch

from adapt.common.cautions import DATA_CAUTION
from adapt.common.errors import InputError
from adapt.common.io import atomic_write_json
from adapt.common.runtime import apply_threads
from adapt.config.common import PACKAGED_ENCODER, optional_str
from adapt.config.vocab import VocabJob
from adapt.contracts.manifest import RunFolder
from adapt.contracts.model_folder import VOCAB_MODEL, resolve_model_folder
from adapt.contracts.prepared_corpus import iter_text_batches, split_shards
from adapt.corpus.profile import tokenizer_stats
from adapt.training.encoder import KEY, encoder_body, load_mlm, load_tokenizer, open_tokenizer, vocab_sha256
from adapt.training.export import export_checkpoint
from adapt.training.vocab import (ChosenWord, WordCounts, choose_words, count_words, extend_embeddings,
                                  extend_tokenizer, require_wordpiece, rule_tally, split_words)

log = logging.getLogger(__name__)

REPORT = "vocab_report.json"
FERTILITY_DOCS = 2000  # documents per text set on which fertility is measured before and after
BATCH_ROWS = 1024
VOCAB_CAUTION = ("The added words are listed in vocab_report.json and ship inside the model's tokenizer, where "
                 "anyone who gets the model can read them: review the list before the model leaves your "
                 "governance; if a name, place or case detail got in, raise words.min_docs or lower "
                 "words.max_capitalised_share.")


def _texts(shards: list[Path], limit: int) -> list[str]:
    out: list[str] = []
    for batch in iter_text_batches(shards, BATCH_ROWS):
        out.extend(batch[:limit - len(out)])
        if len(out) >= limit:
            break
    return out


def _no_word_error(cfg: VocabJob, counts: WordCounts, known: set[str]) -> InputError:
    top = max(((counts.count[w], w) for w in split_words(counts, known)), default=None)
    seen = (f"the most frequent split word, {top[1]!r}, occurs {top[0]} times in {counts.docs[top[1]]} documents"
            if top else "no word is split into pieces")
    return InputError(f"corpus={cfg.corpus}: no word of {counts.total_docs} training documents meets the rule "
                      f"(words.min_count={cfg.words.min_count}, words.min_docs={cfg.words.min_docs}, ...); {seen}; "
                      "lower words.min_count or words.min_docs, or give a larger corpus")


def _load_model(cfg: VocabJob, path: str) -> tuple[torch.nn.Module, bool]:
    """The model to extend and whether it has an MLM head. For a checkpoint without one, the body alone: the
    randomly initialised head is not written, so that pretrain sees it missing and warms it up."""
    with torch.random.fork_rng():
        torch.manual_seed(cfg.seed)
        model, report = load_mlm(cfg.encoder, path)
    if not report.needs_warmup:
        return model, True
    return encoder_body(model), False


def _fertility(before, after, texts: dict[str, list[str]]) -> dict[str, dict]:
    out = {}
    for name, docs in texts.items():
        b, a = tokenizer_stats(before, docs), tokenizer_stats(after, docs)
        saved = 1 - a["tokens"] / b["tokens"] if b["tokens"] else None
        out[name] = {"docs": b["docs"], "words": b["words"], "tokens_before": b["tokens"],
                     "tokens_after": a["tokens"], "fertility_before": b["fertility"],
                     "fertility_after": a["fertility"], "tokens_saved_share": saved}
    return out


def _word_record(w: ChosenWord, new_id: int, tokenizer) -> dict:
    return {"word": w.word, "id": new_id, "count": w.count, "docs": w.docs,
            "pieces": tokenizer.convert_ids_to_tokens(list(w.pieces)), "tokens_saved": w.tokens_saved,
            "domain_ratio": w.domain_ratio}


def _summary(result: dict) -> list[str]:
    lines = [f"added {result['added_count']:,} words to the vocabulary ({result['base_vocab_size']:,} -> "
             f"{result['vocab_size']:,} tokens); first: "
             + ", ".join(w["word"] for w in result["added"][:8])]
    left = result["left_out"]
    lines.append(f"  of {sum(left.values()):,} words cut into pieces, {left['passed']:,} met the rule; left out by "
                 + ", ".join(f"words.{key} {n:,}" for key, n in left.items() if key != "passed"))
    for name, f in result["fertility"].items():
        lines.append(f"  {name:<8} fertility {f['fertility_before']:.3f} -> {f['fertility_after']:.3f} tokens/word "
                     f"({f['tokens_saved_share']:.1%} fewer tokens on {f['docs']:,} documents)")
    lines.append(f"extended encoder: {result['model_dir']} (train it with adapt-pretrain "
                 f"encoder.name_or_path={result['out_dir']})")
    lines.append(VOCAB_CAUTION)
    return lines


def run(cfg: VocabJob) -> dict:
    """Extend cfg.encoder's vocabulary with domain words of cfg.corpus; write model/, vocab_report.json and
    manifest.json; return the report with a summary."""
    apply_threads(cfg.runtime)
    general_dir = optional_str(cfg.general)
    train = split_shards(cfg.corpus, "train")
    heldout = split_shards(cfg.corpus, "heldout")
    general = split_shards(general_dir, "train") if general_dir else []
    path = resolve_model_folder(cfg.encoder.name_or_path, KEY)
    setting = f"{KEY}={cfg.encoder.name_or_path}"
    base_tok = load_tokenizer(cfg.encoder)
    require_wordpiece(base_tok, setting)
    inputs = [Path(cfg.corpus)] + ([Path(general_dir)] if general_dir else [])
    if cfg.encoder.name_or_path != PACKAGED_ENCODER:
        inputs.append(Path(path))
    folder = RunFolder(cfg.out_dir, "vocab", cfg, inputs=[p for p in inputs if p.exists()], seed=cfg.seed)
    try:
        result = _extend(cfg, path, setting, base_tok, train, heldout, general, general_dir)
    except BaseException:
        folder.finish(status="failed")
        raise
    folder.finish(added=result["added_count"], vocab_size=result["vocab_size"])
    result["summary"] = _summary(result)
    return result


def _extend(cfg: VocabJob, path: str, setting: str, base_tok, train, heldout, general, general_dir) -> dict:
    domain = count_words(base_tok, iter_text_batches(train, BATCH_ROWS), cfg.max_docs)
    general_counts = count_words(base_tok, iter_text_batches(general, BATCH_ROWS)) if general else None
    known = set(base_tok.get_vocab())
    words = choose_words(domain, cfg.words, known, general_counts)
    if not words:
        raise _no_word_error(cfg, domain, known)
    tokenizer = open_tokenizer(path, cfg.encoder.trust_remote_code, setting)
    new_ids = extend_tokenizer(tokenizer, words)
    model, has_head = _load_model(cfg, path)
    extend_embeddings(model, words, new_ids)
    out = Path(cfg.out_dir)
    weights = export_checkpoint(model, tokenizer, out / VOCAB_MODEL)
    texts = {"train": _texts(train, FERTILITY_DOCS), "heldout": _texts(heldout, FERTILITY_DOCS)}
    if general:
        texts["general"] = _texts(general, FERTILITY_DOCS)
    result = {
        "encoder": cfg.encoder.name_or_path, "model_dir": str(out / VOCAB_MODEL), "out_dir": str(out),
        "base_vocab_size": len(base_tok), "vocab_size": len(tokenizer), "added_count": len(words),
        "base_vocab_sha256": vocab_sha256(base_tok), "vocab_sha256": vocab_sha256(tokenizer),
        "mlm_head": "kept; new output-bias entries start at the mean of their pieces'" if has_head else
                    "not in the checkpoint: not written, so adapt-pretrain warms it up",
        "embedding_init": "mean of the word's pieces' embedding rows",
        "counted": {"docs": domain.total_docs, "words": domain.total_words, "distinct_words": len(domain.count)},
        "rule": dict(vars(cfg.words)), "general": general_dir,
        "left_out": rule_tally(domain, cfg.words, known, general_counts),
        "fertility": _fertility(base_tok, tokenizer, texts),
        "weights": weights,
        "added": [_word_record(w, new_ids[w.word], base_tok) for w in words],
        "cautions": [VOCAB_CAUTION, DATA_CAUTION,
                     "Pseudo-perplexity depends on the tokenizer: compare the extended model's figures only with "
                     "figures measured with the same vocabulary (vocab_sha256)."],
    }
    atomic_write_json(out / REPORT, result)
    return result
