"""Render the prepare profile (profile.json's dict) as readable Markdown."""

from __future__ import annotations


def _pct(x: float | None) -> str:
    return "n/a" if x is None else f"{100 * x:.1f}%"


def _num(x: float | None, digits: int = 3) -> str:
    return "n/a" if x is None else f"{x:.{digits}f}"


def _table(header: list[str], rows: list[list]) -> list[str]:
    out = ["| " + " | ".join(header) + " |", "|" + "---|" * len(header)]
    out += ["| " + " | ".join(str(c).replace("|", "\\|").replace("\n", " ") for c in r) + " |" for r in rows]
    return out + [""]


def _inputs(p: dict) -> list[str]:
    i = p["inputs"]
    out = ["## Inputs", "", f"- inputs: {', '.join(i['inputs'])}",
           f"- files: {i['files']} found, {i['files_read']} read, {len(i['files_skipped'])} skipped",
           f"- documents read: {i['docs_read']:,}; empty records skipped: {i['empty_records']:,}; "
           f"duplicate ids made unique: {i['ids_made_unique']:,}",
           f"- records decoded with the fallback encoding {i['fallback_encoding']}: "
           f"{sum(i['fallback_decoded'].values()):,} in {len(i['fallback_decoded'])} file(s)", ""]
    if i["files_skipped"]:
        out += _table(["skipped file", "reason"], [[k, v] for k, v in list(i["files_skipped"].items())[:20]])
    return out


def _funnel(p: dict) -> list[str]:
    rows = [[f["stage"], f"{f['docs']:,}", f"{f['words']:,}"] for f in p["funnel"]]
    out = ["## Documents and words after each step", ""] + _table(["after", "documents", "words"], rows)
    out += ["Words are whitespace-separated tokens; \"read\" counts them in the raw text (markup included).", ""]
    out += ["## Removed documents", ""]
    out += _table(["reason", "documents"], [[r, f"{v['count']:,}"] for r, v in p["removed"].items()])
    for reason, v in p["removed"].items():
        if v["examples"]:
            out += [f"Examples of `{reason}` (redacted, truncated):", ""]
            out += [f"- `{e['id']}` — {e['detail']}: “{e['text']}”" for e in v["examples"]] + [""]
    return out


def _cleaning(p: dict) -> list[str]:
    c, ch = p["cleaning"], p["charset"]
    b = c["boilerplate"]
    out = ["## Cleaning", "", f"- documents with markup stripped: {c['docs_with_markup']:,}",
           f"- control/invisible characters removed: {c['control_chars_removed']:,}",
           f"- mojibake sequences repaired: {c['mojibake_repairs']:,}",
           f"- boilerplate: {b['distinct_lines']} repeated line(s); {b['lines_removed']:,} line(s) removed from "
           f"{b['docs_affected']:,} documents", ""]
    if b["examples"]:
        out += _table(["boilerplate line (example)", "removed from documents"],
                      [[e["line"], e["seen"]] for e in b["examples"]])
    out += ["## Character set", "", f"- language: {ch['language']}; documents with more than "
            f"{_pct(ch['max_disallowed_share'])} disallowed characters removed: {ch['removed']:,}", ""]
    if ch["top_disallowed"]:
        out += _table(["disallowed character", "count"], [[e["name"], f"{e['count']:,}"] for e in ch["top_disallowed"]])
    li = p["language_id"]
    out += ["## Language", ""]
    if li["min_probability"] <= 0:
        return out + ["- not checked (language_id.min_probability=0)", ""]
    out += [f"- {li['method']}, on the first {li['sample_chars']:,} characters of each document; "
            f"{li['passed_precheck']:,} documents passed the function-word pre-check without it",
            f"- documents identified as another language than {li['language']} with probability >= "
            f"{li['min_probability']} removed (wrong_language): {li['removed']:,} of {li['checked']:,} checked "
            f"({_pct(li['removed_share'])})", ""]
    if li["identified_as"]:
        out += _table(["removed documents identified as", "documents"],
                      [[k, f"{n:,}"] for k, n in li["identified_as"].items()])
    return out


def _quality(p: dict) -> list[str]:
    q = p["quality"]
    out = ["## Quality", ""]
    if q["kind"] == "classifier":
        out += [f"- classifier trained on {q['gold_path']} ({q['gold_counts']})",
                f"- {q['cv_folds']}-fold cross-validated accuracy {_num(q['cv_accuracy'])} ± "
                f"{_num(q['cv_accuracy_std'])}; majority-class baseline {_num(q['majority_baseline_accuracy'])}"
                + ("" if q["beats_baseline"] else " — NOT better than the baseline: scores are not informative")]
    else:
        out += [f"- heuristic score ({q['note']}); rules: " + "; ".join(q["rules"])]
    out += [f"- threshold {q['min_score']}: {q['removed']:,} of {q['scored_docs']:,} scored documents removed", ""]
    if q.get("sources_hit_hard"):
        out += ["Sources losing more than 10% of their documents to the quality filter (the gold set may not "
                "represent them):", ""]
        out += _table(["source", "scored", "removed"], [[h["source"], h["scored"], h["removed"]]
                                                       for h in q["sources_hit_hard"]])
    out += _table(["score from", "to", "documents"], [[h["from"], h["to"], h["docs"]] for h in q["score_histogram"]])
    return out


def _dups_privacy(p: dict) -> list[str]:
    d, m, pd = p["duplicates"], p["duplicates"]["method"], p["personal_data"]
    out = ["## Duplicates", "",
           f"- {d['exact_duplicates']:,} exact and {d['near_duplicates']:,} near duplicates among "
           f"{d['docs_checked']:,} documents: duplicate share {_pct(d['duplicate_share'])} "
           f"({d['clusters']:,} clusters; {d['reference']})",
           f"- MinHash over word {m['ngram_words']}-grams, {m['num_hashes']} hashes, {m['bands']} bands of "
           f"{m['rows_per_band']} rows; estimated Jaccard >= {m['threshold']}: {d['candidate_pairs']:,} candidate "
           f"pairs, {d['verified_pairs']:,} verified; duplicates {'removed' if d['removed'] else 'kept'}", "",
           "## Personal data", "", f"- mode: {pd['mode']}; kinds: {', '.join(pd['kinds'])}"]
    if pd["findings"] is None:
        out += ["- NOT scanned."]
    else:
        out += [f"- documents with findings: {pd['docs_with_findings']:,}; dropped: {pd['docs_dropped']:,}", ""]
        out += _table(["kind", "findings"], [[k, f"{n:,}"] for k, n in pd["findings"].items()])
    out += ["Automated detection misses names, addresses and free-text identifiers. Follow local law, "
            "data-protection rules and your institution's governance before using or sharing this corpus.", ""]
    c = p.get("contamination")
    if c:
        out += ["## Contamination with task texts", "",
                f"- task folder {c['task_dir']}; a document overlaps a task text when it contains >= "
                f"{_pct(c['min_containment'])} of its word {c['ngram_words']}-grams; action {c['action']} "
                f"(splits {', '.join(c['remove_splits'])}): {c['removed_docs']:,} document(s) removed", ""]
        out += _table(["split", "task texts", "found in corpus", "share", "corpus documents"],
                      [[s, v["task_texts"], v["found_in_corpus"], _pct(v["found_share"]), v["corpus_docs"]]
                       for s, v in c["splits"].items()])
    return out


def _split_vocab(p: dict) -> list[str]:
    s, tk, ov = p["split"], p["tokenizer"], p.get("unigram_overlap")
    out = ["## Output", "", f"- train: {s['train_docs']:,} documents, {s['train_words']:,} words, "
           f"{s['train_shards']} shard(s)", f"- heldout: {s['heldout_docs']:,} documents, {s['heldout_words']:,} "
           f"words, {s['heldout_shards']} shard(s); split by duplicate cluster", "", "Length of kept documents:", ""]
    out += _table(["words from", "to", "documents"],
                  [[h["words_from"], h["words_to"], h["docs"]] for h in s["length_histogram"] if h["docs"]])
    rows = [["corpus", _num(tk["corpus"]["fertility"], 2), _pct(tk["corpus"]["unknown_rate"]), tk["corpus"]["docs"]]]
    if tk["general"]:
        rows.append(["general text", _num(tk["general"]["fertility"], 2), _pct(tk["general"]["unknown_rate"]),
                     tk["general"]["docs"]])
    out += [f"## Tokenizer ({tk['encoder']})", "", "Fertility = subword tokens per word (Rust et al. 2021).", ""]
    out += _table(["text", "fertility", "unknown tokens", "documents sampled"], rows)
    if ov:
        out += ["## Vocabulary overlap with general text", "",
                f"- top-{ov['compared']:,} unigrams (stop words left out; Gururangan et al. 2020 §3.1 used 10K): "
                f"{ov['shared']:,} shared = {_pct(ov['overlap'])}",
                f"- distinct words: corpus {ov['corpus_distinct_words']:,}, general {ov['general_distinct_words']:,}",
                f"- frequent corpus words absent from general text: {', '.join(ov['corpus_only_examples'])}", ""]
    return out


def render_markdown(p: dict) -> str:
    t = p["totals"]
    out = ["# Corpus profile", "",
           f"{t['docs_read']:,} documents read, {t['docs_kept']:,} kept ({t['words_kept']:,} words), "
           f"{t['docs_removed']:,} removed, in {t['seconds']:.1f} s.", ""]
    if p["warnings"]:
        out += ["**Warnings**", ""] + [f"- {w}" for w in p["warnings"]] + [""]
    for part in (_inputs, _funnel, _cleaning, _quality, _dups_privacy, _split_vocab):
        out += part(p)
    return "\n".join(out).rstrip() + "\n"
