"""Turn the collected numbers into the report's sections (blocks both renderers draw), first half: the verdict,
the corpus and the training run. ``sections_results`` holds the rest."""

from __future__ import annotations

from adapt.reporting import sections_results as later
from adapt.reporting.blocks import (SECTIONS, Block, Bullets, Figure, KeyFigures, Missing, Para, Row, Section,
                                    Sources, Sub, Table, Verdict)
from adapt.reporting.glance import key_figures
from adapt.reporting.values import MISSING, dig, fmt, fmt_int, fmt_seconds, fmt_share, fmt_sig, number

PARTS = {"prepared": "domain corpus (prepare)", "general": "general corpus (prepare)",
         "vocab": "vocabulary extension (vocab)", "canary": "memorisation audit (canary)",
         "pretrain": "pretraining run", "score": "pseudo-perplexity (score)", "compare": "downstream (compare)"}


def build_sections(report: dict) -> list[Section]:
    builders = {"verdict": verdict_blocks, "corpus": corpus_blocks,
                "training": lambda r: training_blocks(r) + _memorisation(r.get("memorisation") or {}),
                "pppl": later.pppl_blocks, "downstream": later.downstream_blocks, "cost": later.cost_blocks,
                "provenance": later.provenance_blocks, "cautions": later.caution_blocks}
    return [Section(anchor, title, builders[anchor](report)) for anchor, title in SECTIONS]


def _missing(part: dict, what: str) -> list[Block]:
    """The block that says a part is not shown, and why (empty when the part was read)."""
    if part.get("state") == "read":
        return []
    return [Missing(f"{what}: {part.get('note') or part.get('state')}")]


def verdict_blocks(report: dict) -> list[Block]:
    v = report.get("verdict") or {}
    outcome = str(v.get("outcome") or "")
    kind = ("missing" if not outcome else "better" if outcome.endswith("better")
            else "worse" if outcome.endswith("worse") else "none")
    label = f"{outcome.upper()} · {v.get('pair')}" if outcome else "NO VERDICT"
    blocks: list[Block] = [Para(report.get("question") or "", "lead"),
                           Verdict(kind, label, v.get("evidence") or v.get("sentence") or "",
                                   [f"Caution: {c}" for c in v.get("cautions") or []])]
    figures = key_figures(report)
    if figures:
        blocks.append(KeyFigures(figures))
    blocks.append(Figure("headline"))
    if v.get("detail"):
        blocks.append(Para(f"All tests of this pair: {v['detail']}.", "note"))
    rows = [(PARTS.get(s["role"], s["role"]), s.get("path") or MISSING, s["state"], s.get("note") or "")
            for s in report.get("sources") or []]
    blocks += [Sub("What this report read"), Sources(rows)]
    return blocks


def _funnel_rows(funnel: list[dict]) -> list[list[str]]:
    rows, prev = [], None
    for r in funnel:
        lost = (prev["docs"] - r["docs"]) if prev and prev.get("docs") is not None and r.get("docs") is not None \
            else None
        rows.append([str(r.get("stage") or MISSING).replace("_", " "), fmt_int(r.get("docs")),
                     fmt_int(lost) if prev else "", fmt_int(r.get("words"))])
        prev = r
    return rows


def corpus_blocks(report: dict) -> list[Block]:
    part = dig(report, "corpus", "domain") or {}
    general = dig(report, "corpus", "general") or {}
    blocks = _missing(part, "Domain corpus")
    if part.get("state") == "read":
        t = part.get("totals") or {}
        tok = dig(part, "tokenizer", "corpus") or {}
        blocks += [Para(f"{fmt_int(t.get('docs_read'))} documents read ({fmt_int(t.get('words_read'))} words), "
                        f"{fmt_int(t.get('docs_kept'))} kept ({fmt_int(t.get('words_kept'))} words, "
                        f"{fmt_int(tok.get('tokens'))} tokens of {dig(part, 'tokenizer', 'encoder') or 'the encoder'}"
                        f"), {fmt_int(t.get('docs_removed'))} removed; domain {part.get('domain') or MISSING}, "
                        f"read from {', '.join(map(str, part.get('inputs') or [])) or MISSING}."),
                   Figure("corpus"),
                   Row([[Sub("Documents and words after each step"),
                         Table(["after step", "documents", "removed by the step", "words"],
                               _funnel_rows(part.get("funnel") or []),
                               "Words are whitespace-separated; tokens are counted once, on the kept corpus.")],
                        [Sub("Removed documents by reason"),
                         Table(["reason", "documents"], [[k.replace("_", " "), fmt_int(v)]
                                                          for k, v in (part.get("removed") or {}).items()])]])]
        blocks += _duplicates_and_privacy(part) + [Row([_personal_data(part), _contamination(part)])]
        blocks += _vocabulary(part)
        if part.get("warnings"):
            blocks += [Sub("Warnings from the corpus audit"), Bullets(list(part["warnings"]))]
    blocks += _vocab_extension(dig(report, "corpus", "vocab") or {})
    blocks += _missing(general, "General corpus")
    if general.get("state") == "read":
        t = general.get("totals") or {}
        blocks.append(Para(f"General text (replay and forgetting checks): {fmt_int(t.get('docs_kept'))} of "
                           f"{fmt_int(t.get('docs_read'))} documents kept ({fmt_int(t.get('words_kept'))} words), "
                           f"from {', '.join(map(str, general.get('inputs') or [])) or MISSING}."))
    return blocks


def _personal_data(part: dict) -> list[Block]:
    p = part.get("personal_data") or {}
    rows = [[kind.replace("_", " "), fmt_int(n)] for kind, n in (p.get("findings") or {}).items()]
    return [Sub("Personal data found"),
            Table(["kind", "matches"], rows or [["none found", "0"]],
                  f"Mode {p.get('mode') or MISSING}: {fmt_int(p.get('docs_with_findings'))} documents had a match, "
                  f"{fmt_int(p.get('docs_dropped'))} were dropped.")]


def _duplicates_and_privacy(part: dict) -> list[Block]:
    d = part.get("duplicates") or {}
    q = part.get("quality") or {}
    return [Sub("Duplicates and quality"),
            Para(f"{fmt_int(d.get('exact_duplicates'))} exact and {fmt_int(d.get('near_duplicates'))} near "
                 f"duplicates among {fmt_int(d.get('docs_checked'))} documents checked: a duplicate share of "
                 f"{fmt_share(d.get('duplicate_share'))} (MinHash over word {d.get('ngram_words') or MISSING}-grams, "
                 f"estimated Jaccard ≥ {d.get('threshold') or MISSING}; Lee et al. 2022 found 3–14% in common "
                 "corpora). One document per cluster was kept."),
            Para(f"Quality filter: {q.get('kind') or MISSING}"
                 + (f", cross-validated accuracy {fmt(q.get('cv_accuracy'))} against a majority baseline of "
                    f"{fmt(q.get('majority_baseline_accuracy'))}" if q.get("cv_accuracy") is not None else "")
                 + f"; {fmt_int(q.get('removed'))} documents removed.", "note")]


def _contamination(part: dict) -> list[Block]:
    c = part.get("contamination") or {}
    if not c.get("splits"):
        return [Sub("Contamination with the labelled task"),
                Missing("Contamination: not checked (prepare ran without contamination.task_dir)")]
    rows = [[split, fmt_int(v.get("task_texts")), fmt_int(v.get("found_in_corpus")), fmt_share(v.get("found_share"))]
            for split, v in c["splits"].items()]
    return [Sub("Contamination with the labelled task"),
            Table(["task split", "task texts", "found inside corpus documents", "share"], rows,
                  f"Task {c.get('task_dir') or MISSING}; action {c.get('action') or MISSING}; "
                  f"{fmt_int(c.get('removed_docs'))} corpus documents removed.")]


def _vocabulary(part: dict) -> list[Block]:
    tok = part.get("tokenizer") or {}
    o = part.get("overlap") or {}
    rows = [[name, fmt_int(dig(tok, name, "docs")), fmt_int(dig(tok, name, "words")), fmt_int(dig(tok, name, "tokens")),
             fmt(dig(tok, name, "fertility")), fmt_share(dig(tok, name, "unknown_rate"), 2)]
            for name in ("corpus", "general") if tok.get(name)]
    blocks: list[Block] = [Sub("Tokenizer fertility and vocabulary overlap")]
    blocks.append(Table(["text", "documents", "words", "tokens", "fertility (tokens per word)", "unknown tokens"],
                        [["domain" if r[0] == "corpus" else r[0], *r[1:]] for r in rows] or [[MISSING] * 6],
                        "Fertility = subword tokens per word (Rust et al. 2021); a much higher figure on domain "
                        "text suggests adding domain tokens."))
    if o.get("overlap") is not None:
        examples = ", ".join(o.get("corpus_only_examples") or [])
        blocks.append(Para(f"Vocabulary overlap with general text: {fmt_share(o.get('overlap'))} of the top "
                           f"{fmt_int(o.get('top_n'))} words are shared ({fmt_int(o.get('shared'))} words; "
                           f"Gururangan et al. 2020 measure domain similarity this way)."
                           + (f" Frequent domain words missing from general text: {examples}." if examples else "")))
    else:
        blocks.append(Missing("Vocabulary overlap: not measured (prepare had no general reference text)"))
    return blocks


def _optional_head(part: dict, title: str) -> tuple[list[Block], bool]:
    """The heading of a part of an optional stage: nothing when its folder was not given; with the reason when
    it was given but could not be read. The flag says whether the part's own blocks follow."""
    if not part.get("path"):
        return [], False
    return [Sub(title)] + _missing(part, title), part.get("state") == "read"


def _vocab_extension(part: dict) -> list[Block]:
    """What adapt-vocab added (shown only when a vocab folder was given)."""
    blocks, read = _optional_head(part, "Vocabulary extension")
    if not read:
        return blocks
    rows = [[name, fmt_int(f.get("docs")), fmt(f.get("fertility_before")), fmt(f.get("fertility_after")),
             fmt_share(f.get("tokens_saved_share"), 1)] for name, f in (part.get("fertility") or {}).items()
            if isinstance(f, dict)]
    blocks += [Para(f"{fmt_int(part.get('added_count'))} domain words were added to the vocabulary of "
                    f"{part.get('encoder') or MISSING} ({fmt_int(part.get('base_vocab_size'))} → "
                    f"{fmt_int(part.get('vocab_size'))} tokens). Pseudo-perplexity is only comparable between "
                    "models with the same vocabulary."),
               Table(["text", "documents", "fertility before", "fertility after", "fewer tokens"], rows
                     or [[MISSING] * 5], "Fertility = subword tokens per word (Rust et al. 2021)."),
               Table(["added word", "occurrences", "documents", "pieces before", "tokens saved"],
                     [[str(w.get("word")), fmt_int(w.get("count")), fmt_int(w.get("docs")),
                       " ".join(map(str, w.get("pieces") or [])), fmt_int(w.get("tokens_saved"))]
                      for w in part.get("top_words") or []] or [[MISSING] * 5],
                     "The words that save the most tokens; the full list is in vocab_report.json. The added words "
                     "ship inside the model's tokenizer: review them before the model is shared.")]
    return blocks


def _memorisation(part: dict) -> list[Block]:
    """The canary audit (shown only when an audit folder was given)."""
    blocks, read = _optional_head(part, "Memorisation audit (canaries)")
    if not read:
        return blocks
    rows = [["controls (never planted)" if r["repeats"] == 0 else f"planted {r['repeats']}×",
             fmt_int(r.get("canaries")), fmt(r.get("mean_exposure"), 2)]
            for r in sorted(part.get("by_repeats") or [], key=lambda r: r["repeats"])]
    return blocks + [Table(["canaries", "how many", "mean exposure (bits)"], rows or [[MISSING] * 3],
                           f"Model {part.get('encoder') or MISSING}; the largest exposure measurable is "
                           f"{fmt(part.get('max_exposure'), 2)} bits (Carlini et al. 2019). "
                           + str(part.get("reading") or ""))]


def training_blocks(report: dict) -> list[Block]:
    t = report.get("training") or {}
    blocks = _missing(t, "Pretraining run")
    if t.get("state") not in ("read", "incomplete"):
        return blocks
    prec = t.get("precision") or {}
    precision = prec.get("chosen") or (f"{prec.get('requested')} (requested; the run did not record the one it "
                                       "used)" if prec.get("requested") else MISSING)
    tps = [v for v in t.get("tokens_per_second") or [] if v is not None]
    b = t.get("batch") or {}
    blocks += [Para(f"{fmt_int(t.get('step'))} optimizer steps of {fmt_int(t.get('max_steps'))}, "
                    f"{fmt_int(t.get('tokens_seen'))} tokens seen in {fmt_seconds(t.get('wall_seconds'))} "
                    f"(last logged {fmt_int(tps[-1] if tps else None)} tokens/s); precision {precision}; "
                    f"training variant {t.get('adapter') or MISSING}, {fmt_int(t.get('trainable_parameters'))} of "
                    f"{fmt_int(t.get('total_parameters'))} parameters trained; batch {b.get('batch_size') or MISSING}"
                    f" × {b.get('grad_accum_steps') or 1} accumulation × {b.get('max_seq_len') or MISSING} tokens; "
                    f"masking rate {t.get('masking_rate') or MISSING}; encoder {t.get('encoder') or MISSING}."),
               Figure("training")]
    rows = []
    def with_ci(which: str, key: str) -> str:  # pseudo-perplexity carries its bootstrap interval
        low, high = number(dig(t, which, key + "_ci_low")), number(dig(t, which, key + "_ci_high"))
        band = f" ({fmt_sig(low)}–{fmt_sig(high)})" if low is not None and high is not None else ""
        return fmt_sig(number(dig(t, which, key))) + band

    keys = set(t.get("start") or {}) | set(t.get("end") or {})
    for key in sorted(k for k in keys if not k.endswith(("_ci_low", "_ci_high"))):
        before, after = number(dig(t, "start", key)), number(dig(t, "end", key))
        change = fmt(after - before, 3, signed=True) if before is not None and after is not None else MISSING
        rows.append([key.replace("heldout_loss_", "held-out loss, ").replace("pppl_", "pseudo-perplexity, ")
                     + " text", with_ci("start", key), with_ci("end", key), change])
    held: list[Block] = [Sub("Held-out figures before and after")]
    held.append(Table(["figure", "base (step 0)", "adapted (end)", "change"], rows,
                      "MLM loss in nats per masked token, on a fixed mask drawn once from the seed.") if rows
                else Missing("Held-out figures: the run logged none (it stopped before its first evaluation)"))
    return blocks + [Row([held, _warmup_blocks(t.get("head_warmup"))])]


def _warmup_blocks(warm: dict | None) -> list[Block]:
    blocks: list[Block] = [Sub("MLM head warm-up")]
    if not warm:
        return blocks + [Para("No head warm-up ran: the starting checkpoint's MLM head was complete (or the run "
                              "turned the warm-up off).", "note")]
    losses = [v for v in warm.get("losses") or [] if v is not None]
    return blocks + [Para(f"{fmt_int(warm.get('epochs'))} epochs with the encoder frozen, held-out loss "
                          f"{fmt(losses[0] if losses else None)} → {fmt(min(losses) if losses else None)}; "
                          + ("levelled off." if warm.get("converged") else
                             "still falling at the end: the base figures are pessimistic.")),
                     Figure("head_warmup")]
