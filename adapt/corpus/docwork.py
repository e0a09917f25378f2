"""Per-document work, run on chunks of documents in worker processes (or in-process when num_proc=1).

Two passes: ``normalise_chunk`` (cleaning, plus line hashes for boilerplate counting) and ``filter_chunk``
(boilerplate removal, character set, length, language, personal data, quality, contamination, duplicate
signatures).
Workers get their read-only state once, through the pool initializer.
"""

from __future__ import annotations

import multiprocessing as mp
from collections import Counter, deque
from dataclasses import dataclass, field
from typing import TYPE_CHECKING, Any, Callable, Iterable, Iterator

import numpy as np

from adapt.config.prepare import PrepareJob
from adapt.corpus import charsets, cleaning, privacy
from adapt.corpus.contamination import TaskIndex, find_overlaps
from adapt.corpus.language import LanguageIdentifier
from adapt.corpus.minhash import MinHasher, Shingler

if TYPE_CHECKING:  # scikit-learn is imported only when a quality model is built
    from adapt.corpus.quality import QualityModel

# Funnel stages in order; a document "reaches" a stage when it survived every earlier one.
STAGES = ("read", "cleaned", "charset", "min_words", "language", "personal_data", "quality", "contamination",
          "exact_duplicates", "near_duplicates")
FILTER_STAGES = STAGES[2:STAGES.index("exact_duplicates")]  # the per-document stages of filter_chunk
REASONS = {"cleaned": "empty_after_cleaning", "min_words": "too_short", "charset": "charset",
           "language": "wrong_language",
           "personal_data": "personal_data", "quality": "low_quality", "contamination": "contamination",
           "exact_duplicates": "exact_duplicate", "near_duplicates": "near_duplicate"}


@dataclass
class WorkState:
    cfg: PrepareJob
    frequent_lines: frozenset = frozenset()
    quality: "QualityModel | None" = None
    tasks: TaskIndex | None = None


_STATE: dict[str, Any] = {}


def init_worker(state: WorkState) -> None:
    cfg = state.cfg
    c = cfg.charset
    _STATE.clear()
    _STATE.update(
        state=state,
        charset=charsets.CharsetRules(c.language, c.extra_allowed, c.extra_denied, c.emoji).compile(),
        minhash=MinHasher(cfg.dedup.num_hashes, cfg.dedup.ngram_words, cfg.seed) if cfg.dedup.near else None,
        task_shingler=Shingler(cfg.contamination.ngram_words, cfg.seed) if state.tasks else None,
        language=LanguageIdentifier(cfg.language_id.sample_chars) if cfg.language_id.min_probability > 0 else None,
    )


def normalise_chunk(chunk: list[tuple[str, str, str]]) -> list[tuple]:
    """(id, text, source, markup_share, control_chars, mojibake_repairs, line hashes, raw words) per document."""
    cfg: PrepareJob = _STATE["state"].cfg
    out = []
    for doc_id, text, source in chunk:
        r = cleaning.normalise_text(text, strip_markup=cfg.clean.strip_markup,
                                    repair_mojibake=cfg.clean.repair_mojibake)
        keys = (cleaning.line_keys(r.text, cfg.boilerplate.min_line_chars) if cfg.boilerplate.enabled
                else np.empty(0, np.uint64))
        out.append((doc_id, r.text, source, r.markup_share, r.control_chars, r.mojibake_repairs, keys,
                    len(text.split())))
    return out


@dataclass
class ChunkResult:
    kept: list[dict] = field(default_factory=list)
    signatures: np.ndarray | None = None
    removed: list[dict] = field(default_factory=list)
    reached: Counter = field(default_factory=Counter)  # stage -> documents that survived it
    words: Counter = field(default_factory=Counter)  # stage -> words in those documents
    counts: Counter = field(default_factory=Counter)  # assorted counters for the profile
    bad_chars: Counter = field(default_factory=Counter)
    wrong_languages: Counter = field(default_factory=Counter)  # most probable language of wrong_language removals
    boilerplate_examples: Counter = field(default_factory=Counter)
    quality_scores: list[float] = field(default_factory=list)
    quality_by_source: Counter = field(default_factory=Counter)  # (source, "scored"|"removed") -> documents
    task_hits: list[tuple[str, int, float]] = field(default_factory=list)  # (doc id, task index, containment)


def _remove(res: ChunkResult, doc: dict, stage: str, detail: str) -> None:
    res.removed.append({"id": doc["id"], "source": doc["source"], "reason": REASONS[stage], "detail": detail,
                        "text": doc["text"][:2000]})


def _pass(res: ChunkResult, stage: str, docs: list[dict]) -> None:
    res.reached[stage] += len(docs)
    res.words[stage] += sum(d["words"] for d in docs)


def _language_filter(docs: list[dict], res: ChunkResult) -> list[dict]:
    """Documents identified as another language than charset.language with at least
    language_id.min_probability are removed."""
    cfg: PrepareJob = _STATE["state"].cfg
    identifier: LanguageIdentifier | None = _STATE["language"]
    if identifier is None:
        _pass(res, "language", docs)
        return docs
    expected, threshold = cfg.charset.language, cfg.language_id.min_probability
    out = []
    for d in docs:
        if identifier.is_clearly(d["text"], expected):
            res.counts["language_prechecked"] += 1
            out.append(d)
            continue
        v = identifier.identify(d["text"], expected)
        if v.is_other_language(expected, threshold):
            res.wrong_languages[v.top] += 1
            _remove(res, d, "language", f"identified as {v.top} (p={v.top_probability:.2f} >= "
                                        f"language_id.min_probability={threshold}); p({expected})={v.probability:.2f}")
            continue
        out.append(d)
    _pass(res, "language", out)
    return out


def _early_filters(docs: list[dict], res: ChunkResult) -> list[dict]:
    """Boilerplate lines, character set, minimum length, language, personal data."""
    st: WorkState = _STATE["state"]
    cfg = st.cfg
    out = []
    for d in docs:
        text, n_lines = cleaning.remove_lines(d["text"], st.frequent_lines, cfg.boilerplate.min_line_chars)
        if n_lines:
            res.counts["boilerplate_lines_removed"] += n_lines
            res.counts["docs_with_boilerplate"] += 1
            ex = res.boilerplate_examples  # per line: documents it was removed from (the first 50 lines seen)
            for ln in set(d["text"].split("\n")) - set(text.split("\n")):
                if ln in ex or len(ex) < 50:
                    ex[ln] += 1
        d["text"], d["words"] = text, cleaning.count_words(text)
        v = charsets.check_charset(d["text"], _STATE["charset"], cfg.charset.top_chars)
        res.bad_chars.update(dict(v.top))
        if v.share > cfg.charset.max_disallowed_share:  # before the length check: CJK text has few spaces
            _remove(res, d, "charset", f"{v.share:.1%} disallowed: {charsets.describe_top(v.top)}")
            continue
        out.append(d)
    _pass(res, "charset", out)
    docs, out = out, []
    for d in docs:
        if d["words"] < cfg.clean.min_words:
            _remove(res, d, "min_words", f"{d['words']} words < clean.min_words={cfg.clean.min_words}")
            continue
        out.append(d)
    _pass(res, "min_words", out)
    out = _language_filter(out, res)
    if cfg.privacy.mode == "off":
        _pass(res, "personal_data", out)
        return out
    docs, out = out, []
    for d in docs:
        found = privacy.find_personal_data(d["text"], cfg.privacy.kinds)
        kinds = privacy.count_kinds(found)
        res.counts.update({f"pii_{k}": n for k, n in kinds.items()})
        res.counts["docs_with_pii"] += bool(found)
        if found and cfg.privacy.mode == "drop":
            _remove(res, d, "personal_data", ", ".join(f"{k} x{n}" for k, n in sorted(kinds.items())))
            continue
        if found and cfg.privacy.mode == "redact":
            d["text"] = privacy.redact(d["text"], found)
            d["words"] = cleaning.count_words(d["text"])
        out.append(d)
    _pass(res, "personal_data", out)
    return out


def _late_filters(docs: list[dict], res: ChunkResult) -> list[dict]:
    """Quality score and contamination."""
    st: WorkState = _STATE["state"]
    cfg = st.cfg
    scores = st.quality.score([(d["text"], d["markup_share"]) for d in docs]) if st.quality else np.ones(len(docs))
    out = []
    for d, s in zip(docs, scores):
        d["quality"] = float(s)
        res.quality_scores.append(float(s))
        res.quality_by_source[(d["source"], "scored")] += 1
        if st.quality is not None and s < cfg.quality.min_score:
            res.quality_by_source[(d["source"], "removed")] += 1
            _remove(res, d, "quality", f"score {s:.3f} < quality.min_score={cfg.quality.min_score}")
            continue
        out.append(d)
    _pass(res, "quality", out)
    if st.tasks is None:
        _pass(res, "contamination", out)
        return out
    docs, out = out, []
    ct = cfg.contamination
    for d in docs:
        hits = find_overlaps(d["text"], st.tasks, _STATE["task_shingler"], ct.min_containment)
        res.task_hits += [(d["id"], h.task, h.containment) for h in hits]
        bad = [h for h in hits if st.tasks.texts[h.task].split in ct.remove_splits]
        if bad and ct.action == "remove":
            worst = max(bad, key=lambda h: h.containment)
            t = st.tasks.texts[worst.task]
            _remove(res, d, "contamination", f"contains {worst.containment:.0%} of {t.split} text {t.id}"
                                              + (f" and {len(bad) - 1} more" if len(bad) > 1 else ""))
            continue
        out.append(d)
    _pass(res, "contamination", out)
    return out


def filter_chunk(chunk: list[dict]) -> ChunkResult:
    """Run every per-document filter; survivors get an exact-text hash and (optionally) a MinHash signature."""
    res = ChunkResult()
    survivors = _late_filters(_early_filters(chunk, res), res)
    for d in survivors:
        d["doc_hash"] = cleaning.document_key(d["text"])
    res.kept = survivors
    if _STATE["minhash"] is not None:
        res.signatures = _STATE["minhash"].signatures([d["text"] for d in survivors])
    return res


class Workers:
    """``imap`` over chunks in a process pool, or in this process when num_proc == 1 (same code path)."""

    def __init__(self, num_proc: int, state: WorkState):
        self.num_proc = num_proc
        self.state = state
        self.pool = None

    def __enter__(self) -> "Workers":
        if self.num_proc > 1:
            # fork where the platform has it: workers start at once and inherit the read-only state
            method = "fork" if "fork" in mp.get_all_start_methods() else "spawn"
            self.pool = mp.get_context(method).Pool(self.num_proc, initializer=init_worker, initargs=(self.state,))
        else:
            init_worker(self.state)
        return self

    def imap(self, func: Callable, chunks: Iterable) -> Iterator:
        """Results in input order. At most 4 chunks per process are in flight, so reading never runs far ahead
        of the workers (Pool.imap would pull the whole input into its queue)."""
        if self.pool is None:
            yield from map(func, chunks)
            return
        pending: deque = deque()
        for chunk in chunks:
            pending.append(self.pool.apply_async(func, (chunk,)))
            if len(pending) >= 4 * self.num_proc:
                yield pending.popleft().get()
        while pending:
            yield pending.popleft().get()

    def __exit__(self, *exc: object) -> None:
        if self.pool is not None:
            self.pool.terminate() if exc[0] else self.pool.close()
            self.pool.join()
