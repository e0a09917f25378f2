#!/usr/bin/env python3
"""Rebuild the invented sample data in corpora_samples/ (or in another folder).

    python scripts/samples/generate.py              # rewrites corpora_samples/
    python scripts/samples/generate.py --out DIR    # writes the same files into DIR

Everything is produced from one fixed seed with ``random.Random`` instances
(never the module-level random functions), so every run writes byte-identical
files.  The data describe an invented jurisdiction (the Republic of Quellmar)
and an invented hospital (Orlindhal General Infirmary); see corpora_samples/README.md.
The phrase tables and name lists are JSON files under data/ (see _data.py).

Outputs (relative to the output folder):
    legal/, clinical/        unlabelled in-domain corpora (.txt, .jsonl, .jsonl.gz,
                             cp1252 .txt) with planted defects and synthetic PII
    general/general.jsonl    general-domain text
    tasks/{legal,clinical}/{train,dev,test}.jsonl   labelled classification tasks
    tasks/legal_multi/{train,dev,test}.jsonl        a multi-label task (a list of labels per letter)
    quality_gold.jsonl       good/poor documents for a quality classifier
    PLANTED.md, PLANTED.json what was planted where, for recall tests
"""

from __future__ import annotations

import argparse
import gzip
import json
import random
import re
import shutil
import sys
import time
from collections import Counter
from dataclasses import dataclass, field
from pathlib import Path

sys.dont_write_bytecode = True
HERE = Path(__file__).resolve().parent
if str(HERE) not in sys.path:
    sys.path.insert(0, str(HERE))
SAMPLES_DIR = HERE.parents[1] / "corpora_samples"

import _clinical  # noqa: E402
import _general  # noqa: E402
import _legal  # noqa: E402
import _legal_multi  # noqa: E402
import _noise  # noqa: E402
import _quality  # noqa: E402
import _tasks  # noqa: E402
import _world as W  # noqa: E402
from _terms import CLINICAL_TERMS, LEGAL_TERMS, SEEN  # noqa: E402

SEED = 20240611

GENRE_COUNTS = {
    "legal": {"judgment": 230, "appeal_ruling": 110, "tribunal_decision": 170,
              "tenancy_notice": 170, "contract_clauses": 190, "firm_memo": 170,
              "statutory_instrument": 140, "correspondence": 180},
    "clinical": {"discharge_summary": 230, "nursing_note": 200, "radiology_report": 200,
                 "referral_letter": 200, "medication_review": 150, "clinic_letter": 200,
                 "triage_note": 180},
}
GENERAL_COUNTS = {"local_news": 130, "recipe": 100, "travel": 110, "sports": 120,
                  "product_review": 120, "weather": 90, "hobby_blog": 130}

# Planted defects per corpus (document counts).  Modifications of existing
# documents and added documents are kept disjoint: one defect per document.
NOISE_PLAN = {
    "exact_duplicate": 45,      # added: verbatim copy of another document
    "near_duplicate": 60,       # added: copy with 2-5% of words changed or a sentence added
    "html_markup": 15,          # modified: wrapped in an HTML page
    "boilerplate_footer": 24,   # modified: shared confidentiality/system footer appended
    "mojibake": 8,              # modified: UTF-8 text decoded as cp1252
    "foreign_script": 8,        # added: mostly Cyrillic, Greek or CJK
    "short_fragment": 12,       # added: 4-18 word fragment
    "keyword_spam": 10,         # added: keyword stuffing
}
PII_DOCS = {"legal": 50, "clinical": 70}
TXT_FILES = 150
TXT_GENRES = {"legal": ["judgment", "appeal_ruling"],
              "clinical": ["referral_letter", "clinic_letter", "discharge_summary"]}
GZ_FILE = ("legal", "archive/registry_export_2019.jsonl.gz", ["correspondence", "firm_memo"], 90)
CP1252_FILES = {"legal": [("legacy_cp1252/letter_0001.txt", "correspondence"),
                          ("legacy_cp1252/letter_0002.txt", "correspondence")],
                "clinical": [("legacy_cp1252/referral_0001.txt", "referral_letter")]}
PREFIX = {"legal": "leg", "clinical": "cli", "general": "gen"}
MODULES = {"legal": _legal, "clinical": _clinical, "general": _general}


@dataclass
class Doc:
    text: str
    genre: str
    tags: list[str] = field(default_factory=list)
    ref: int | None = None          # index of the source document (duplicates)
    note: str = ""
    pii: list[tuple[str, str]] = field(default_factory=list)
    id: str = ""
    location: str = ""              # file the document is written to


# ---------------------------------------------------------------------------
# Corpus construction
# ---------------------------------------------------------------------------
def _clean_docs(domain: str, rng: random.Random) -> tuple[list[Doc], object]:
    mod = MODULES[domain]
    g = mod.new_grammar(rng)
    docs = [Doc(mod.make_document(g, genre), genre)
            for genre, n in GENRE_COUNTS[domain].items() for _ in range(n)]
    rng.shuffle(docs)
    return docs, g


def _title(doc: Doc) -> str:
    first = next((l for l in doc.text.split("\n") if l.strip()), doc.genre)
    return first[:70]


def _modify(domain: str, docs: list[Doc], pool: list[int], rng: random.Random) -> None:
    """Apply in-place defects and PII to disjoint sets of documents."""
    def take(n: int) -> list[int]:
        return [pool.pop() for _ in range(n)]

    for i in take(NOISE_PLAN["html_markup"]):
        docs[i].text = _noise.html_wrap(rng, docs[i].text, _title(docs[i]))
        docs[i].tags.append("html_markup")
    for i in take(NOISE_PLAN["boilerplate_footer"]):
        footer = rng.choice(_noise.FOOTERS[domain])
        docs[i].text += "\n\n" + footer
        docs[i].tags.append("boilerplate_footer")
        docs[i].note = str(_noise.FOOTERS[domain].index(footer))
    for i in take(NOISE_PLAN["mojibake"]):
        docs[i].text = _noise.mojibake(rng, docs[i].text)
        docs[i].tags.append("mojibake")
    for i in take(PII_DOCS[domain]):
        sents, found = _noise.pii_sentences(rng, domain)
        docs[i].text = _noise.insert_lines(rng, docs[i].text, sents)
        docs[i].pii = found
        docs[i].tags.append("pii")


def _additions(domain: str, docs: list[Doc], pool: list[int], g, rng: random.Random) -> list[Doc]:
    mod = MODULES[domain]
    genres = list(GENRE_COUNTS[domain])
    added: list[Doc] = []
    for _ in range(NOISE_PLAN["exact_duplicate"]):
        src = pool.pop()
        added.append(Doc(docs[src].text, docs[src].genre, ["exact_duplicate"], ref=src))
    for _ in range(NOISE_PLAN["near_duplicate"]):
        src = pool.pop()
        fresh = mod.make_document(g, docs[src].genre)
        extra = max(re.split(r"(?<=[.!?])\s+", fresh.replace("\n", " ")), key=len)
        text, note = _noise.near_duplicate(rng, docs[src].text, extra)
        added.append(Doc(text, docs[src].genre, ["near_duplicate"], ref=src, note=note))
    scripts = ["cyrillic", "greek", "cjk"]
    for k in range(NOISE_PLAN["foreign_script"]):
        script = scripts[k % 3]
        added.append(Doc(_noise.foreign_doc(rng, domain, script), rng.choice(genres),
                         ["foreign_script"], note=script))
    for _ in range(NOISE_PLAN["short_fragment"]):
        genre = rng.choice(genres)
        added.append(Doc(_noise.fragment(rng, mod.make_document(g, genre)), genre, ["short_fragment"]))
    for _ in range(NOISE_PLAN["keyword_spam"]):
        added.append(Doc(_noise.keyword_spam(rng, domain), rng.choice(genres), ["keyword_spam"]))
    return added


def _cp1252_docs(domain: str, g, rng: random.Random) -> list[Doc]:
    mod = MODULES[domain]
    out = []
    for path, genre in CP1252_FILES[domain]:
        name = f"{rng.choice(W.ACCENTED_FIRST)} {rng.choice(W.ACCENTED_SURNAMES)}"
        other = f"{rng.choice(W.ACCENTED_FIRST)} {rng.choice(W.ACCENTED_SURNAMES)}"
        text = mod.make_document(g, genre)
        text = text.replace("'", "\u2019").replace(" - ", " \u2013 ")
        lines = text.split("\n")
        lines.insert(1, rng.choice([f"Attn: señora {name}, Área de Atención, café building, 2º piso",
                                    f"Copy to: {name} (née {other.split(' ')[1]})"]))
        lines.append(f"Translation checked by {other}; déjà transmitted – original in español.")
        out.append(Doc("\n".join(lines), genre, ["encoding_cp1252"], location=f"{domain}/{path}"))
    return out


def build_corpus(domain: str, rng: random.Random) -> list[Doc]:
    docs, g = _clean_docs(domain, rng)
    pool = list(range(len(docs)))
    rng.shuffle(pool)
    _modify(domain, docs, pool, rng)
    added = _additions(domain, docs, pool, g, rng)
    for doc in added:       # insert at random positions; sources keep their index via ref
        docs.append(doc)
    order = list(range(len(docs)))
    rng.shuffle(order)
    docs = [docs[i] for i in order]
    remap = {old: new for new, old in enumerate(order)}
    for d in docs:
        if d.ref is not None:
            d.ref = remap[d.ref]
    docs.extend(_cp1252_docs(domain, g, rng))
    _assign_locations(domain, docs, rng)
    return docs


def _assign_locations(domain: str, docs: list[Doc], rng: random.Random) -> None:
    free = [i for i, d in enumerate(docs) if not d.location]
    txt_cands = [i for i in free if docs[i].genre in TXT_GENRES[domain]]
    txt = sorted(rng.sample(txt_cands, TXT_FILES))
    serial = Counter()
    for i in txt:
        year = rng.randint(2019, 2024)
        if domain == "legal":
            code = rng.choice(["qca", "qsb"]) if docs[i].genre == "appeal_ruling" else rng.choice(["qhc", "qdc", "qhl", "qfc"])
            sub = "judgments"
        else:
            code = {"referral_letter": "referral", "clinic_letter": "clinic",
                    "discharge_summary": "discharge"}[docs[i].genre]
            sub = "letters"
        serial[(year, code)] += 1
        docs[i].location = f"{domain}/{sub}/{year}/{code}_{year}_{serial[(year, code)]:04d}.txt"
        docs[i].id = docs[i].location
    if GZ_FILE[0] == domain:
        _, path, genres, n = GZ_FILE
        cands = [i for i in free if docs[i].genre in genres and not docs[i].location]
        for i in sorted(rng.sample(cands, n)):
            docs[i].location = f"{domain}/{path}"
    for d in docs:
        if not d.location:
            d.location = f"{domain}/{d.genre}.jsonl"
        if not d.id:
            d.id = d.location
    counter = 0
    for d in docs:
        if d.location.endswith((".jsonl", ".jsonl.gz")):
            counter += 1
            d.id = f"{PREFIX[domain]}-{counter:05d}"


def build_general(rng: random.Random) -> list[Doc]:
    g = _general.new_grammar(rng)
    docs = [Doc(_general.make_document(g, genre), genre)
            for genre, n in GENERAL_COUNTS.items() for _ in range(n)]
    rng.shuffle(docs)
    for k, d in enumerate(docs, 1):
        d.id, d.location = f"gen-{k:05d}", "general/general.jsonl"
    return docs


# ---------------------------------------------------------------------------
# Writing
# ---------------------------------------------------------------------------
def _jsonl(rows: list[dict]) -> bytes:
    return "".join(json.dumps(r, ensure_ascii=False) + "\n" for r in rows).encode("utf-8")


def write_corpus(out: Path, docs: list[Doc]) -> None:
    files: dict[str, list[Doc]] = {}
    for d in docs:
        files.setdefault(d.location, []).append(d)
    for loc, group in sorted(files.items()):
        path = out / loc
        path.parent.mkdir(parents=True, exist_ok=True)
        if loc.endswith(".txt"):
            assert len(group) == 1
            enc = "cp1252" if "encoding_cp1252" in group[0].tags else "utf-8"
            path.write_bytes((group[0].text + "\n").encode(enc))
            continue
        data = _jsonl([{"id": d.id, "text": d.text, "source": d.genre} for d in group])
        if loc.endswith(".gz"):
            data = gzip.compress(data, compresslevel=9, mtime=0)
        path.write_bytes(data)


def write_rows(out: Path, rel: str, rows: list[dict]) -> None:
    path = out / rel
    path.parent.mkdir(parents=True, exist_ok=True)
    path.write_bytes(_jsonl(rows))


OUTPUT_DIRS = ["legal", "clinical", "general", "tasks"]
OUTPUT_FILES = ["quality_gold.jsonl", "PLANTED.md", "PLANTED.json"]


def clear_outputs(out: Path) -> None:
    """Remove what an earlier run wrote (and nothing else: the folder also holds README.md)."""
    for sub in OUTPUT_DIRS:
        if (out / sub).exists():
            shutil.rmtree(out / sub)
    for name in OUTPUT_FILES:
        (out / name).unlink(missing_ok=True)


# ---------------------------------------------------------------------------
# Manifest of planted material
# ---------------------------------------------------------------------------
def planted_manifest(corpora: dict[str, list[Doc]], tasks: dict, quality_counts: dict) -> dict:
    man: dict = {"seed": SEED, "corpora": {}, "tasks": {}, "quality_gold": quality_counts}
    for domain, docs in corpora.items():
        entry: dict = {"documents": len(docs), "defects": {}, "pii": {}, "footers": _noise.FOOTERS[domain]}
        for tag in list(NOISE_PLAN) + ["encoding_cp1252"]:
            rows = []
            for d in docs:
                if tag in d.tags:
                    row = {"id": d.id}
                    if d.ref is not None:
                        row["duplicate_of"] = docs[d.ref].id
                    if d.note:
                        row["detail"] = d.note if tag != "boilerplate_footer" else f"footer {d.note}"
                    rows.append(row)
            entry["defects"][tag] = rows
        for d in docs:
            for kind, value in d.pii:
                entry["pii"].setdefault(kind, []).append({"id": d.id, "value": value})
        entry["pii_documents"] = sum(1 for d in docs if d.pii)
        entry["files"] = sorted({d.location for d in docs})
        man["corpora"][domain] = entry
    for name, splits in tasks.items():
        man["tasks"][name] = {
            "sizes": {s: len(r) for s, r in splits.items()},
            "label_noise_examples": _tasks.NOISE_COUNTS,
            "labels": sorted({r["label"] for r in splits["train"]}),
            "terms_train_only_first": SEEN,
        }
    return man


def multi_label_manifest(splits: dict[str, list[dict]]) -> dict:
    return {"sizes": {s: len(r) for s, r in splits.items()}, "multi_label": True,
            "labels": sorted({lab for r in splits["train"] for lab in r["label"]}),
            "labels_per_example": {s: dict(sorted(Counter(len(r["label"]) for r in rows).items()))
                                   for s, rows in splits.items()},
            "label_noise_examples": _legal_multi.NOISE_PER_SPLIT, "terms_train_only_first": SEEN}


def _compact_json(obj: dict) -> str:
    """Indented JSON, but each innermost record on a single line."""
    text = json.dumps(obj, ensure_ascii=False, indent=1)
    return re.sub(r"\{\s+([^{}\[\]]*?)\s+\}", lambda m: "{" + re.sub(r"\s*\n\s*", " ", m.group(1)) + "}", text) + "\n"


def planted_markdown(man: dict) -> str:
    lines = ["# Planted material", "",
             "Written by `generate.py` (seed %d). Machine-readable detail, with the id of every" % man["seed"],
             "affected document and every planted identifier, is in `PLANTED.json`.", "",
             "Document ids: the `id` field in `.jsonl`/`.jsonl.gz` files; for a `.txt` file (one document",
             "per file) its path relative to this folder. A `.txt` file ends with one newline that is not",
             "part of the document text.", "",
             "## Defects in the unlabelled corpora", "",
             "| defect | legal | clinical | what it is |", "| --- | ---: | ---: | --- |"]
    what = {
        "exact_duplicate": "verbatim copy of another document in the same corpus",
        "near_duplicate": "copy with 2-5% of words changed, or one sentence added",
        "html_markup": "document wrapped in an HTML page (nav, style, script)",
        "boilerplate_footer": "one of two shared footer/disclaimer lines appended",
        "mojibake": "UTF-8 text decoded as cp1252 (e.g. `Ã©`, `â€™`)",
        "foreign_script": "mostly Cyrillic, Greek or CJK text (one third each)",
        "short_fragment": "4-18 word fragment",
        "keyword_spam": "keyword stuffing",
        "encoding_cp1252": "whole file stored in cp1252, not UTF-8 (`legacy_cp1252/`)",
    }
    legal, clinical = man["corpora"]["legal"], man["corpora"]["clinical"]
    total = {"legal": 0, "clinical": 0}
    for tag, desc in what.items():
        nl, nc = len(legal["defects"][tag]), len(clinical["defects"][tag])
        total["legal"] += nl
        total["clinical"] += nc
        lines.append(f"| {tag} | {nl} | {nc} | {desc} |")
    lines.append(f"| **total** | {total['legal']} of {legal['documents']} | "
                 f"{total['clinical']} of {clinical['documents']} | one defect per document |")
    lines += ["", "Duplicates of both kinds point at their source with `duplicate_of` in PLANTED.json.", "",
              "Boilerplate footers:", ""]
    for domain in ["legal", "clinical"]:
        for k, f in enumerate(man["corpora"][domain]["footers"]):
            n = sum(1 for r in man["corpora"][domain]["defects"]["boilerplate_footer"] if r["detail"] == f"footer {k}")
            lines.append(f"- {domain} footer {k} ({n} documents): \"{f}\"")
    lines += ["", "## Synthetic personal data", "",
              "Invented identifiers inserted as extra lines (1-3 per document) in documents that carry no other defect.",
              "", "| kind | legal | clinical | format |", "| --- | ---: | ---: | --- |"]
    fmt = {"email": "address at a `.example` or `.test` domain",
           "phone": "`01632 960 xxx`, `07700 900xxx` or `+34 6xx xxx xxx`",
           "dni": "8 digits + valid mod-23 check letter",
           "iban": "Spanish IBAN (ES), valid national and ISO 13616 mod-97 check digits, some spaced",
           "card": "16 digits starting 4000, valid Luhn check digit, some spaced",
           "dob": "`DOB dd/mm/yyyy`, `born on d Month yyyy`, `date of birth dd.mm.yyyy`, `D.O.B. yyyy-mm-dd`"}
    for kind, desc in fmt.items():
        lines.append(f"| {kind} | {len(legal['pii'].get(kind, []))} | {len(clinical['pii'].get(kind, []))} | {desc} |")
    lines.append(f"| documents with PII | {legal['pii_documents']} | {clinical['pii_documents']} | |")
    lines += ["", "## Encodings and containers", "",
              "- cp1252 files: " + ", ".join(f"`{r['id']}`" for d in ("legal", "clinical")
                                             for r in man["corpora"][d]["defects"]["encoding_cp1252"]),
              f"- gzip: `{GZ_FILE[0]}/{GZ_FILE[1]}` ({GZ_FILE[3]} documents, JSON Lines inside)",
              "- every other `.jsonl` and `.txt` file is UTF-8", "",
              "## Labelled tasks", "",
              "Labels are balanced per split. A fixed number of examples per class carry a wrong label",
              "(moved to another class so the balance is kept): "
              + ", ".join(f"{s} {n}" for s, n in _tasks.NOISE_COUNTS.items()) + " examples per task.",
              f"The training splits only use the first {SEEN} characteristic terms of each class; dev and test use",
              "all of them (see `_terms.py`); every term also occurs in the matching unlabelled corpus.", "",
              "`tasks/legal_multi` is multi-label: client letters raising one to three areas of law, the label a",
              "list of areas; letters per number of areas: "
              + "; ".join(f"{s} " + ", ".join(f"{k} area(s) {v}" for k, v in c.items())
                          for s, c in man["tasks"]["legal_multi"]["labels_per_example"].items())
              + ". Label noise: " + ", ".join(f"{s} {n}" for s, n in _legal_multi.NOISE_PER_SPLIT.items())
              + " letters with one area dropped or added.", "",
              "## Quality gold", "",
              "Poor documents by kind: " + ", ".join(f"{k} {v}" for k, v in man["quality_gold"].items()) + ".", ""]
    return "\n".join(lines)


# ---------------------------------------------------------------------------
# Checks and statistics
# ---------------------------------------------------------------------------
_SENT = re.compile(r"(?<=[.!?])\s+|\n+")


def sentences(text: str) -> list[str]:
    """Sentences: units of three or more words that end in . ! or ? (headings,
    field labels and signature lines are not counted)."""
    out = []
    for s in _SENT.split(text):
        s = s.strip()
        if s.endswith((".", "!", "?")) and len(s.split()) >= 3:
            out.append(s)
    return out


def variety(texts: list[str]) -> tuple[int, float, float]:
    sents = [s for t in texts for s in sentences(t)]
    grams: list[tuple] = []
    for t in texts:
        toks = t.lower().split()
        grams.extend(tuple(toks[i:i + 5]) for i in range(len(toks) - 4))
    return len(sents), len(set(sents)) / max(1, len(sents)), len(set(grams)) / max(1, len(grams))


def verify(corpora: dict[str, list[Doc]], tasks: dict) -> list[str]:
    problems = []
    for domain, docs in corpora.items():
        for d in docs:
            for kind, value in d.pii:
                if value not in d.text:
                    problems.append(f"{d.id}: {kind} value missing")
                ok = {"dni": W.dni_valid, "iban": W.iban_valid, "card": W.luhn_valid}.get(kind)
                if ok and not ok(value):
                    problems.append(f"{d.id}: invalid {kind} {value}")
    corpus_text = {"legal": "\n".join(d.text for d in corpora["legal"]).lower(),
                   "clinical": "\n".join(d.text for d in corpora["clinical"]).lower()}
    for domain, terms in [("legal", LEGAL_TERMS), ("clinical", CLINICAL_TERMS)]:
        for lab, words in terms.items():
            for w in words:
                if w.lower() not in corpus_text[domain]:
                    problems.append(f"task term {w!r} ({domain}/{lab}) absent from corpus")
        corpus_sents = {s for d in corpora[domain] for s in sentences(d.text)}
        texts = {d.text.strip() for d in corpora[domain]}
        for split, rows in tasks[domain].items():
            shared = sum(1 for r in rows for s in sentences(r["text"]) if len(s.split()) >= 6 and s in corpus_sents)
            if any(r["text"] in texts for r in rows):
                problems.append(f"task {domain}/{split} copies a corpus document")
            if shared:
                problems.append(f"task {domain}/{split}: {shared} sentences also in corpus")
    return problems


def report(out: Path, corpora: dict[str, list[Doc]], general: list[Doc], tasks: dict, started: float) -> None:
    print(f"{'corpus':10s} {'docs':>6s} {'words':>8s} {'sentences':>9s} {'distinct':>8s} {'5-gram':>7s}")
    for name, docs in list(corpora.items()) + [("general", general)]:
        texts = [d.text for d in docs]
        n, ds, dg = variety(texts)
        words = sum(len(t.split()) for t in texts)
        print(f"{name:10s} {len(docs):6d} {words:8d} {n:9d} {ds:8.3f} {dg:7.3f}")
    for name, docs in corpora.items():
        clean = [len(d.text.split()) for d in docs if not d.tags]
        print(f"{name} clean document length: min {min(clean)}, median {sorted(clean)[len(clean) // 2]}, max {max(clean)}")
    for name, splits in tasks.items():
        desc = ", ".join(f"{s} {len(r)}" for s, r in splits.items())
        lens = [len(r["text"].split()) for rows in splits.values() for r in rows]
        print(f"task {name}: {desc}; words {min(lens)}-{max(lens)}; labels "
              f"{dict(sorted(Counter(r['label'] for r in splits['train']).items()))}")
    written = [p for sub in OUTPUT_DIRS for p in (out / sub).rglob("*") if p.is_file()]
    total = sum(p.stat().st_size for p in written + [out / name for name in OUTPUT_FILES])
    print(f"output size {total / 1e6:.2f} MB in {out}; {time.time() - started:.1f} s")


# ---------------------------------------------------------------------------
def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description="Rebuild the invented sample data byte for byte.")
    parser.add_argument("--out", type=Path, default=SAMPLES_DIR,
                        help=f"output folder (default {SAMPLES_DIR}); earlier outputs in it are replaced")
    out = parser.parse_args(argv).out.resolve()
    out.mkdir(parents=True, exist_ok=True)
    started = time.time()
    root = random.Random(SEED)
    seeds = {k: root.randrange(2**32) for k in ["legal", "clinical", "general", "tasks", "quality"]}
    clear_outputs(out)
    corpora = {d: build_corpus(d, random.Random(seeds[d])) for d in ["legal", "clinical"]}
    general = build_general(random.Random(seeds["general"]))
    tasks = _tasks.make_tasks(random.Random(seeds["tasks"]))
    quality, qcounts = _quality.make_quality(random.Random(seeds["quality"]))
    # its own stream, drawn after every other seed: adding it changed none of the other files
    legal_multi = _legal_multi.make_legal_multi(random.Random(root.randrange(2**32)))

    for docs in corpora.values():
        write_corpus(out, docs)
    write_corpus(out, general)
    for name, splits in tasks.items():
        for split, rows in splits.items():
            write_rows(out, f"tasks/{name}/{split}.jsonl", rows)
    for split, rows in legal_multi.items():
        write_rows(out, f"tasks/legal_multi/{split}.jsonl", rows)
    write_rows(out, "quality_gold.jsonl", quality)

    man = planted_manifest(corpora, tasks, qcounts)
    man["tasks"]["legal_multi"] = multi_label_manifest(legal_multi)
    (out / "PLANTED.json").write_bytes(_compact_json(man).encode("utf-8"))
    (out / "PLANTED.md").write_bytes(planted_markdown(man).encode("utf-8"))

    problems = verify(corpora, tasks)
    for p in problems:
        print("WARNING:", p)
    report(out, corpora, general, tasks, started)
    return 1 if problems else 0


if __name__ == "__main__":
    sys.exit(main())
