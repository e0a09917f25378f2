"""Config schema of the prepare job: read, clean, filter, de-duplicate and split raw documents.

Every default is documented once here. No default points into the invented sample corpora: the demo and the
prepare presets set their paths to ``${samples_dir:}/...``.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Optional

from adapt.config.common import EncoderConfig, validate_encoder, validate_out_dir_apart
from adapt.common.errors import Problems

LANGUAGES = ("en", "es")
DOMAINS = ("general", "legal", "clinical")
PRIVACY_MODES = ("report", "redact", "drop", "off")
PRIVACY_KINDS = ("email", "phone", "iban", "card", "dni_nie", "birth_date")
TASK_SPLITS = ("train", "dev", "test")


@dataclass
class ReadConfig:
    # Field (jsonl) or column (csv, parquet) holding the document text, and the one holding its id; documents
    # without an id get "<file>:<line or row>".
    text_field: str = "text"
    id_field: str = "id"
    # Encoding tried when a text file is not valid UTF-8 (cp1252 = Windows Western European); counted in the profile.
    fallback_encoding: str = "cp1252"
    # Delimiter of .csv files (.tsv files always use a tab).
    csv_delimiter: str = ","


@dataclass
class CleanConfig:
    # Strip HTML/XML markup to its text (script and style content dropped, entities decoded).
    strip_markup: bool = True
    # Undo UTF-8 text that was decoded as cp1252 somewhere upstream ("cafÃ©" -> "café").
    repair_mojibake: bool = True
    # Documents with fewer words than this after cleaning are dropped (words = whitespace-separated tokens).
    min_words: int = 20


@dataclass
class BoilerplateConfig:
    # A line (compared case-insensitively, whitespace collapsed) is boilerplate when it occurs in at least
    # min_docs distinct documents OR in at least min_doc_share of them; 0 switches a criterion off. Exact copies
    # of a document are counted once, so duplicated documents do not make their own lines look like boilerplate.
    enabled: bool = True
    min_docs: int = 10
    min_doc_share: float = 0.05
    # Shorter lines (characters) are never boilerplate. Domain text repeats short stock lines that are content
    # ("Chest X-ray: cardiomegaly with upper lobe diversion." in 14 of 1,496 sample clinical notes), while
    # disclaimers and footers are long (88-280 characters in the samples).
    min_line_chars: int = 80


@dataclass
class CharsetConfig:
    # Allow-list and deny-list of characters: en or es (Latin letters with accents, digits, punctuation).
    language: str = "en"
    # Extra characters to allow (wins over the deny-list), e.g. "αβγ" for Greek symbols in formulas.
    extra_allowed: str = ""
    # Extra characters to deny even though the language allows them.
    extra_denied: str = ""
    # Emoji accepted as ordinary characters.
    emoji: str = "🙂😊😀👍👎❤✅❌⭐🎉"
    # Documents whose share of disallowed characters exceeds this are dropped (0.01 = 1 character in 100).
    max_disallowed_share: float = 0.01
    # Offending characters listed per removed document and overall.
    top_chars: int = 5


@dataclass
class LanguageIdConfig:
    # Documents identified as a language other than charset.language with at least this probability are removed
    # as wrong_language (py3langid, 97 languages, model inside its wheel); 0 = no check. 0.5: that language is
    # more likely than all others together; text with no clear language is left to the quality filter.
    min_probability: float = 0.5
    # Characters classified from the start of each document: the cost grows with them (~0.7 ms per 1,000). No
    # English sample document (2,953 legal and clinical ones past the charset and length filters) was identified
    # as another language at 500 or 1,000 characters; at 300, two keyword-spam documents were.
    sample_chars: int = 1000


@dataclass
class QualityConfig:
    # Gold set (.jsonl/.csv/.tsv, optionally .gz, UTF-8, with text and label good/poor) to train the quality
    # classifier on; null = transparent heuristic score instead (reported as such).
    gold_path: Optional[str] = None
    text_field: str = "text"
    label_field: str = "label"
    # Documents scoring below this (probability of "good", or share of heuristic rules passed) are dropped.
    # Low on purpose: a small generic gold set scores structured domain text (medication lists, nursing notes)
    # 0.05-0.5 while keyword spam scores below 0.03 on the samples; clear junk goes, borderline text stays, and
    # every kept document carries its score in the `quality` column for ordering or weighting.
    min_score: float = 0.1
    # Folds of the stratified cross-validation that estimates the classifier's accuracy.
    cv_folds: int = 5
    # log2 of the number of hashed word features (16 = 65,536).
    hash_features_log2: int = 16


@dataclass
class DedupConfig:
    # Exact duplicates: same text after lower-casing and collapsing whitespace.
    exact: bool = True
    # Near duplicates: MinHash over word n-grams + LSH banding, verified by the estimated Jaccard similarity.
    # Defaults chosen with planted near-duplicates (benchmarks/prepare_throughput.py): 3-grams keep a 5% word
    # edit above 0.6 Jaccard where 5-grams fall to ~0.6 and below.
    near: bool = True
    ngram_words: int = 3
    num_hashes: int = 128
    # bands * rows = num_hashes; 32 bands of 4 rows make a pair with Jaccard 0.6 a candidate with p ~ 0.99.
    bands: int = 32
    threshold: float = 0.6
    # Keep one document per cluster (the highest quality); false keeps all, still split by cluster.
    remove: bool = True


@dataclass
class PrivacyConfig:
    # report: count only; redact: replace with typed placeholders such as [EMAIL]; drop: remove the document;
    # off: no scan (a clinical corpus then gets a loud warning).
    mode: str = "redact"
    kinds: list[str] = field(default_factory=lambda: list(PRIVACY_KINDS))


@dataclass
class ContaminationConfig:
    # Folder with train/dev/test .jsonl, .csv or .tsv files (optionally .gz) of a labelled task, read as the
    # compare job reads it; null = no check.
    task_dir: Optional[str] = None
    text_field: str = "text"
    # A corpus document overlaps a task text when it contains at least min_containment of the task text's
    # word n-grams (or the whole text, for texts shorter than ngram_words).
    ngram_words: int = 5
    min_containment: float = 0.5
    # report: list overlaps only; remove: also drop overlapping corpus documents of remove_splits.
    action: str = "remove"
    remove_splits: list[str] = field(default_factory=lambda: ["dev", "test"])


@dataclass
class ProfileConfig:
    # General-text sample to compare the corpus with (fertility, unigram overlap); null = skip the comparison.
    general_path: Optional[str] = None
    # Tokenizer whose fertility (subword tokens per word) and unknown-token rate are measured.
    encoder: EncoderConfig = field(default_factory=EncoderConfig)
    # Documents sampled (seeded) for the tokenizer measures.
    sample_docs: int = 2000
    # Most frequent words compared between corpus and general text (Gururangan et al. 2020 used 10K).
    top_unigrams: int = 10000
    # Removed documents shown per reason in profile.md, and characters shown of each.
    examples_per_reason: int = 3
    example_chars: int = 160


@dataclass
class PrepareRuntimeConfig:
    # Worker processes for the per-document work (cleaning, filters, personal data, signatures).
    num_proc: int = 1
    # Show tqdm progress bars.
    progress: bool = True


ENGINE_KINDS = ("local", "dask")


@dataclass
class EngineConfig:
    # local: runtime.num_proc processes on this machine; dask: a Dask cluster (pip install "adapt[cluster]") does
    # the per-document work and the global near-duplicate step (band-key shuffle, union-find over the edges).
    kind: str = "local"
    # Scheduler of an existing Dask cluster, e.g. tcp://10.0.0.5:8786; null = start a local cluster of
    # engine.workers worker processes (one thread each) for this run.
    address: Optional[str] = None
    workers: int = 2
    # Seconds to wait for engine.address to answer before giving up with one error line.
    connect_timeout_s: float = 10.0


@dataclass
class PrepareJob:
    # Files or folders of documents: .txt (one document per file), .jsonl, .csv/.tsv, .parquet, each
    # optionally gzipped (.gz); folders are read recursively, hidden files skipped.
    inputs: list[str] = field(default_factory=list)
    out_dir: str = "runs/prepared"
    seed: int = 0
    # general, legal or clinical; clinical makes a disabled personal-data scan impossible to miss.
    domain: str = "general"
    # Share of documents held out for evaluation (split by near-duplicate cluster).
    heldout_share: float = 0.1
    # Documents per Parquet shard.
    shard_docs: int = 10000
    # Documents per work chunk sent to a worker process.
    chunk_docs: int = 256
    runtime: PrepareRuntimeConfig = field(default_factory=PrepareRuntimeConfig)
    engine: EngineConfig = field(default_factory=EngineConfig)
    read: ReadConfig = field(default_factory=ReadConfig)
    clean: CleanConfig = field(default_factory=CleanConfig)
    boilerplate: BoilerplateConfig = field(default_factory=BoilerplateConfig)
    charset: CharsetConfig = field(default_factory=CharsetConfig)
    language_id: LanguageIdConfig = field(default_factory=LanguageIdConfig)
    quality: QualityConfig = field(default_factory=QualityConfig)
    dedup: DedupConfig = field(default_factory=DedupConfig)
    privacy: PrivacyConfig = field(default_factory=PrivacyConfig)
    contamination: ContaminationConfig = field(default_factory=ContaminationConfig)
    profile: ProfileConfig = field(default_factory=ProfileConfig)


def _in_open_unit(p: Problems, key: str, value: float, example: float) -> None:
    p.check(0.0 < value < 1.0, f"{key}={value} is outside (0, 1); try {key}={example}")


def _validate_filters(cfg: PrepareJob, p: Problems, k: str) -> None:
    p.check(bool(cfg.read.text_field), f"{k}read.text_field is empty; try {k}read.text_field=text")
    try:
        "".encode(cfg.read.fallback_encoding)
    except LookupError:
        p.add(f"{k}read.fallback_encoding={cfg.read.fallback_encoding!r} is not a known encoding; "
              f"try {k}read.fallback_encoding=cp1252")
    p.check(len(cfg.read.csv_delimiter) == 1,
            f"{k}read.csv_delimiter={cfg.read.csv_delimiter!r} must be one character; try {k}read.csv_delimiter=,")
    p.check(cfg.clean.min_words >= 1, f"{k}clean.min_words={cfg.clean.min_words} must be >= 1; try 20")
    b = cfg.boilerplate
    p.check(b.min_docs == 0 or b.min_docs >= 2,
            f"{k}boilerplate.min_docs={b.min_docs} must be 0 (off) or >= 2; try {k}boilerplate.min_docs=10")
    p.check(0.0 <= b.min_doc_share <= 1.0,
            f"{k}boilerplate.min_doc_share={b.min_doc_share} is outside [0, 1]; try {k}boilerplate.min_doc_share=0.05")
    p.check(not b.enabled or b.min_docs > 0 or b.min_doc_share > 0,
            f"{k}boilerplate.min_docs and min_doc_share are both 0; set one (try {k}boilerplate.min_docs=10) "
            f"or {k}boilerplate.enabled=false")
    p.check(b.min_line_chars >= 1, f"{k}boilerplate.min_line_chars={b.min_line_chars} must be >= 1; try 80")
    c = cfg.charset
    p.check(c.language in LANGUAGES, f"{k}charset.language={c.language!r} is not one of {', '.join(LANGUAGES)}; "
                                     f"try {k}charset.language=en")
    p.check(0.0 <= c.max_disallowed_share < 1.0,
            f"{k}charset.max_disallowed_share={c.max_disallowed_share} is outside [0, 1); "
            f"try {k}charset.max_disallowed_share=0.01")
    p.check(c.top_chars >= 1, f"{k}charset.top_chars={c.top_chars} must be >= 1; try 5")
    li = cfg.language_id
    p.check(0.0 <= li.min_probability < 1.0,
            f"{k}language_id.min_probability={li.min_probability} is outside [0, 1); "
            f"try {k}language_id.min_probability=0.5 (0 = no check)")
    p.check(li.sample_chars >= 50, f"{k}language_id.sample_chars={li.sample_chars} must be >= 50; try 1000")
    q = cfg.quality
    p.check(0.0 <= q.min_score < 1.0,
            f"{k}quality.min_score={q.min_score} is outside [0, 1); try {k}quality.min_score=0.1")
    p.check(2 <= q.cv_folds <= 20, f"{k}quality.cv_folds={q.cv_folds} is outside [2, 20]; try {k}quality.cv_folds=5")
    p.check(10 <= q.hash_features_log2 <= 24,
            f"{k}quality.hash_features_log2={q.hash_features_log2} is outside [10, 24]; try 16")


def _validate_dedup_privacy(cfg: PrepareJob, p: Problems, k: str) -> None:
    d = cfg.dedup
    p.check(1 <= d.ngram_words <= 20, f"{k}dedup.ngram_words={d.ngram_words} is outside [1, 20]; try 3")
    p.check(8 <= d.num_hashes <= 1024, f"{k}dedup.num_hashes={d.num_hashes} is outside [8, 1024]; try 128")
    p.check(d.bands >= 1 and d.num_hashes % max(d.bands, 1) == 0,
            f"{k}dedup.bands={d.bands} must divide dedup.num_hashes={d.num_hashes}; "
            f"try {k}dedup.bands={max(1, d.num_hashes // 4)}")
    _in_open_unit(p, f"{k}dedup.threshold", d.threshold, 0.6)
    pv = cfg.privacy
    p.check(pv.mode in PRIVACY_MODES, f"{k}privacy.mode={pv.mode!r} is not one of {', '.join(PRIVACY_MODES)}; "
                                      f"try {k}privacy.mode=redact")
    unknown = [x for x in pv.kinds if x not in PRIVACY_KINDS]
    p.check(not unknown, f"{k}privacy.kinds has unknown kinds {unknown}; allowed: {', '.join(PRIVACY_KINDS)}")
    ct = cfg.contamination
    p.check(ct.action in ("report", "remove"),
            f"{k}contamination.action={ct.action!r} is not one of report, remove; try {k}contamination.action=remove")
    p.check(1 <= ct.ngram_words <= 20, f"{k}contamination.ngram_words={ct.ngram_words} is outside [1, 20]; try 5")
    _in_open_unit(p, f"{k}contamination.min_containment", ct.min_containment, 0.5)
    bad = [s for s in ct.remove_splits if s not in TASK_SPLITS]
    p.check(not bad, f"{k}contamination.remove_splits has unknown splits {bad}; allowed: {', '.join(TASK_SPLITS)}")


def _validate_out_dir(cfg: PrepareJob, p: Problems, k: str) -> None:
    """The output folder must not overlap an input: outputs would be read as inputs next time, and writing
    there would modify an input folder (checked before Hydra creates the folder)."""
    if not cfg.out_dir:
        p.add(f"{k}out_dir is empty; try {k}out_dir=runs/prepared")
        return
    validate_out_dir_apart(cfg.out_dir, list(cfg.inputs), k, p)


def validate(cfg: PrepareJob, p: Problems, prefix: str = "") -> None:
    k = (prefix + ".") if prefix else ""
    p.check(len(cfg.inputs) > 0, f"{k}inputs is empty; pass {k}inputs=[path/to/folder]")
    _validate_out_dir(cfg, p, k)
    p.check(cfg.domain in DOMAINS, f"{k}domain={cfg.domain!r} is not one of {', '.join(DOMAINS)}; "
                                   f"try {k}domain=general")
    _in_open_unit(p, f"{k}heldout_share", cfg.heldout_share, 0.1)
    p.check(cfg.shard_docs >= 1, f"{k}shard_docs={cfg.shard_docs} must be >= 1; try {k}shard_docs=10000")
    p.check(cfg.runtime.num_proc >= 1,
            f"{k}runtime.num_proc={cfg.runtime.num_proc} must be >= 1; try {k}runtime.num_proc=1")
    e = cfg.engine
    p.check(e.kind in ENGINE_KINDS, f"{k}engine.kind={e.kind!r} is not one of {', '.join(ENGINE_KINDS)}; "
                                    f"try {k}engine.kind=local")
    p.check(e.workers >= 1, f"{k}engine.workers={e.workers} must be >= 1; try {k}engine.workers=2")
    p.check(e.connect_timeout_s > 0, f"{k}engine.connect_timeout_s={e.connect_timeout_s} must be > 0; try 10")
    p.check(cfg.chunk_docs >= 1, f"{k}chunk_docs={cfg.chunk_docs} must be >= 1; try {k}chunk_docs=256")
    _validate_filters(cfg, p, k)
    _validate_dedup_privacy(cfg, p, k)
    pr = cfg.profile
    validate_encoder(pr.encoder, f"{k}profile.encoder", p)
    p.check(pr.sample_docs >= 1, f"{k}profile.sample_docs={pr.sample_docs} must be >= 1; try 2000")
    p.check(pr.top_unigrams >= 10, f"{k}profile.top_unigrams={pr.top_unigrams} must be >= 10; try 10000")
    p.check(pr.examples_per_reason >= 0 and pr.example_chars >= 20,
            f"{k}profile needs examples_per_reason >= 0 and example_chars >= 20; try 3 and 160")
