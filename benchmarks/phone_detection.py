"""Phone-number detection on the invented samples: our pattern vs the phonenumbers library.

Ground truth: corpora_samples/PLANTED.json, where the sample generator (scripts/samples/generate.py) lists every
phone number it planted, with the id of its document. Documents are read with adapt.corpus.readers and cleaned with
adapt.corpus.cleaning.normalise_text (the stage's defaults), so each detector sees the text the prepare stage scans.
Detectors:
  ours:                      adapt.corpus.privacy.find_personal_data(text, ["phone"])
  phonenumbers_<level>_<RG>: phonenumbers.PhoneNumberMatcher(text, RG, leniency=Leniency.<level>)
A reported span is a hit when it overlaps a planted number's place in its document and holds the same digits;
every other span is a false positive. Speed: documents per second over all documents, best of --repeats passes.
phonenumbers is needed by this script only (pip install phonenumbers); the product does not use it.
Usage: python benchmarks/phone_detection.py [--regions GB ES] [--repeats 3]
"""

from __future__ import annotations

import argparse
import json
import os
import re
import subprocess
import sys
import time
from pathlib import Path

from adapt.config.prepare import ReadConfig
from adapt.corpus.cleaning import normalise_text
from adapt.corpus.privacy import find_personal_data
from adapt.corpus.readers import ReadStats, read_documents

SAMPLES = Path(__file__).resolve().parents[1] / "corpora_samples"
DOMAINS = ("legal", "clinical")
EXAMPLES = 5
YEAR = re.compile(r"\D*(?:19|20)\d\d\D*")


def load() -> tuple[dict[str, str], list[dict]]:
    """(document key -> cleaned text, planted numbers with their document key, value, span and format)."""
    planted_json = json.loads((SAMPLES / "PLANTED.json").read_text(encoding="utf-8"))
    docs: dict[str, str] = {}
    planted: list[dict] = []
    for domain in DOMAINS:
        for d in read_documents([str(SAMPLES / domain)], ReadConfig(), ReadStats()):
            docs[f"{domain}:{d.id}"] = normalise_text(d.text).text
        for row in planted_json["corpora"][domain]["pii"].get("phone", []):
            key, value = f"{domain}:{row['id']}", row["value"]
            start = docs.get(key, "").find(value)
            if start < 0:
                sys.exit(f"corpora_samples/PLANTED.json: phone {value!r} not found in document {row['id']} of "
                         f"{domain}; regenerate the samples with scripts/samples/generate.py")
            planted.append({"doc": key, "value": value, "span": (start, start + len(value)),
                            "format": _format(value)})
    return docs, planted


def _format(value: str) -> str:
    """The generator's three formats (scripts/samples/_world.py, phone)."""
    if value.startswith("+34"):
        return "+34 6xx xxx xxx"
    return "01632 960 xxx" if value.startswith("01632") else "07700 900xxx"


def _digits(s: str) -> str:
    return re.sub(r"\D", "", s)


def detectors(regions: list[str]) -> dict:
    import phonenumbers

    def ours(text: str) -> list[tuple[int, int]]:
        return [(f.start, f.end) for f in find_personal_data(text, ["phone"])]

    def library(region: str, leniency):
        return lambda text: [(m.start, m.end) for m in phonenumbers.PhoneNumberMatcher(text, region,
                                                                                        leniency=leniency)]

    out = {"ours": ours}
    for level in ("VALID", "POSSIBLE"):
        for region in regions:
            out[f"phonenumbers_{level}_{region}"] = library(region, getattr(phonenumbers.Leniency, level))
    return out


def measure(detect, docs: dict[str, str], planted: list[dict], repeats: int) -> dict:
    best, spans = float("inf"), {}
    for _ in range(repeats):
        t0 = time.perf_counter()
        spans = {key: detect(text) for key, text in docs.items()}
        best = min(best, time.perf_counter() - t0)
    by_doc: dict[str, list[int]] = {}
    for i, p in enumerate(planted):
        by_doc.setdefault(p["doc"], []).append(i)
    found: set[int] = set()
    false_pos: list[tuple[str, str]] = []
    for key, found_spans in spans.items():
        text = docs[key]
        for start, end in found_spans:
            hit = next((i for i in by_doc.get(key, ()) if start < planted[i]["span"][1]
                        and planted[i]["span"][0] < end and _digits(text[start:end]) == _digits(planted[i]["value"])),
                       None)
            if hit is None:
                false_pos.append((key, text[start:end]))
            else:
                found.add(hit)
    formats: dict[str, list[int]] = {}
    for i, p in enumerate(planted):
        row = formats.setdefault(p["format"], [0, 0])
        row[0] += i in found
        row[1] += 1
    years = [fp for fp in false_pos if YEAR.fullmatch(fp[1])]
    others = [fp for fp in false_pos if not YEAR.fullmatch(fp[1])]
    return {
        "planted_found": len(found), "recall": round(len(found) / len(planted), 3),
        "found_by_format": {f: f"{n} of {total}" for f, (n, total) in sorted(formats.items())},
        "false_positives": len(false_pos),
        "false_positive_years": len(years),
        "documents_with_false_positives": len({k for k, _ in false_pos}),
        "false_positive_examples": [f"{k}: {s!r}" for k, s in (years[:2] + others[:EXAMPLES - 2])],
        "seconds": round(best, 3), "documents_per_s": round(len(docs) / best, 1),
    }


def _cpu_name() -> str:
    lscpu = subprocess.run(["lscpu"], capture_output=True, text=True, check=False).stdout
    return next((ln.split(":", 1)[1].strip() for ln in lscpu.splitlines() if ln.startswith("Model name")), "")


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--regions", nargs="+", default=["GB", "ES"],
                        help="default regions for phonenumbers (numbers without +country code are read as these)")
    parser.add_argument("--repeats", type=int, default=3, help="timed passes per detector; the fastest is reported")
    args = parser.parse_args()
    try:
        import phonenumbers
    except ImportError:
        print("phone_detection.py: the phonenumbers library is not installed; this benchmark compares against it: "
              "pip install phonenumbers", file=sys.stderr)
        sys.exit(2)
    docs, planted = load()
    load_start = list(os.getloadavg())
    results = {name: measure(detect, docs, planted, args.repeats) for name, detect in detectors(args.regions).items()}
    print(json.dumps({
        "cpu": _cpu_name(), "phonenumbers": phonenumbers.__version__, "repeats": args.repeats,
        "load_average_start": load_start, "load_average_end": list(os.getloadavg()),
        "documents": len(docs), "planted_numbers": len(planted), "detectors": results,
    }, indent=2, ensure_ascii=False))


if __name__ == "__main__":
    main()
