"""Every prepare option composes through Hydra and bad values fail with the key, the value and a fix."""

from __future__ import annotations

import dataclasses

import pytest

from adapt.config import compose_job
from adapt.config.prepare import PrepareJob
from adapt.common.errors import ConfigError

BASE = ["inputs=[some/folder]"]

# One non-default value per option (key=value as typed on the command line), checked after composing.
OVERRIDES = {
    "out_dir": ("elsewhere", "elsewhere"), "seed": ("3", 3), "domain": ("clinical", "clinical"),
    "heldout_share": ("0.2", 0.2), "shard_docs": ("50", 50), "runtime.num_proc": ("2", 2), "chunk_docs": ("16", 16),
    "runtime.progress": ("false", False),
    "engine.kind": ("dask", "dask"), "engine.address": ("tcp://10.0.0.5:8786", "tcp://10.0.0.5:8786"),
    "engine.workers": ("4", 4), "engine.connect_timeout_s": ("3", 3.0),
    "read.text_field": ("body", "body"), "read.id_field": ("key", "key"),
    "read.fallback_encoding": ("latin-1", "latin-1"), "read.csv_delimiter": ("';'", ";"),
    "clean.strip_markup": ("false", False), "clean.repair_mojibake": ("false", False),
    "clean.min_words": ("5", 5),
    "boilerplate.enabled": ("false", False), "boilerplate.min_docs": ("3", 3),
    "boilerplate.min_doc_share": ("0.1", 0.1), "boilerplate.min_line_chars": ("20", 20),
    "charset.language": ("es", "es"), "charset.extra_allowed": ("'αβ'", "αβ"),
    "charset.extra_denied": ("'~'", "~"), "charset.emoji": ("'🙂'", "🙂"),
    "charset.max_disallowed_share": ("0.05", 0.05), "charset.top_chars": ("3", 3),
    "language_id.min_probability": ("0.8", 0.8), "language_id.sample_chars": ("300", 300),
    "quality.gold_path": ("gold/g.jsonl", "gold/g.jsonl"), "quality.text_field": ("body", "body"),
    "quality.label_field": ("y", "y"), "quality.min_score": ("0.3", 0.3), "quality.cv_folds": ("3", 3),
    "quality.hash_features_log2": ("12", 12),
    "dedup.exact": ("false", False), "dedup.near": ("false", False), "dedup.ngram_words": ("5", 5),
    "dedup.num_hashes": ("64", 64), "dedup.bands": ("16", 16), "dedup.threshold": ("0.8", 0.8),
    "dedup.remove": ("false", False),
    "privacy.mode": ("drop", "drop"), "privacy.kinds": ("[email,iban]", ["email", "iban"]),
    "contamination.task_dir": ("tasks/x", "tasks/x"), "contamination.text_field": ("body", "body"),
    "contamination.ngram_words": ("8", 8), "contamination.min_containment": ("0.7", 0.7),
    "contamination.action": ("report", "report"), "contamination.remove_splits": ("[test]", ["test"]),
    "profile.general_path": ("general/x", "general/x"), "profile.encoder.name_or_path": ("some/model", "some/model"),
    "profile.sample_docs": ("10", 10), "profile.top_unigrams": ("500", 500),
    "profile.examples_per_reason": ("1", 1), "profile.example_chars": ("40", 40),
}


def _leaf_keys(obj, prefix="") -> set[str]:
    keys = set()
    for f in dataclasses.fields(obj):
        value = getattr(obj, f.name)
        name = f"{prefix}{f.name}"
        if dataclasses.is_dataclass(value) and f.name != "encoder":
            keys |= _leaf_keys(value, name + ".")
        elif f.name == "encoder":
            keys.add(name + ".name_or_path")
        elif name != "inputs":
            keys.add(name)
    return keys


def test_every_option_is_covered_by_this_test():
    assert _leaf_keys(PrepareJob()) == set(OVERRIDES)


def test_every_option_composes_from_the_command_line_syntax():
    # one composition for all options keeps this test fast (each Hydra composition costs ~0.3 s)
    overrides = [f"{key}={text}" for key, (text, _) in OVERRIDES.items() if key != "dedup.num_hashes"]
    cfg = compose_job("prepare", BASE + overrides + ["dedup.num_hashes=64"])
    for key, (_, expected) in OVERRIDES.items():
        value = cfg
        for part in key.split("."):
            value = getattr(value, part)
        assert value == expected, key


def test_defaults_point_nowhere_and_presets_set_the_sample_paths():
    cfg = compose_job("prepare", BASE)
    assert cfg.quality.gold_path is None and cfg.profile.general_path is None
    assert cfg.contamination.task_dir is None
    legal = compose_job("prepare", BASE + ["preset=legal"])
    assert legal.domain == "legal" and legal.contamination.task_dir.endswith("corpora_samples/tasks/legal")
    assert legal.quality.gold_path.endswith("corpora_samples/quality_gold.jsonl")
    assert legal.profile.general_path.endswith("corpora_samples/general")
    clinical = compose_job("prepare", BASE + ["preset=clinical", "debug=tiny"])
    assert clinical.domain == "clinical" and clinical.privacy.mode == "redact"
    assert clinical.dedup.num_hashes == 32 and clinical.dedup.num_hashes % clinical.dedup.bands == 0


BAD_VALUES = [
    ("dedup.threshold=1.3", "dedup.threshold=1.3 is outside (0, 1); try dedup.threshold=0.6"),
    ("dedup.bands=30", "dedup.bands=30 must divide dedup.num_hashes=128"),
    ("charset.language=fr", "charset.language='fr' is not one of en, es"),
    ("privacy.mode=hide", "privacy.mode='hide' is not one of report, redact, drop, off"),
    ("privacy.kinds=[email,ssn]", "privacy.kinds has unknown kinds ['ssn']"),
    ("heldout_share=0", "heldout_share=0.0 is outside (0, 1)"),
    ("read.fallback_encoding=nope", "read.fallback_encoding='nope' is not a known encoding"),
    ("boilerplate.min_docs=1", "boilerplate.min_docs=1 must be 0 (off) or >= 2"),
    ("contamination.remove_splits=[holdout]", "contamination.remove_splits has unknown splits ['holdout']"),
    ("quality.min_score=1.5", "quality.min_score=1.5 is outside [0, 1)"),
    ("language_id.min_probability=1", "language_id.min_probability=1.0 is outside [0, 1)"),
    ("language_id.sample_chars=10", "language_id.sample_chars=10 must be >= 50"),
    ("engine.kind=spark", "engine.kind='spark' is not one of local, dask; try engine.kind=local"),
    ("engine.workers=0", "engine.workers=0 must be >= 1"),
]


def test_bad_values_name_the_key_and_a_fix():
    with pytest.raises(ConfigError) as err:
        compose_job("prepare", BASE + [override for override, _ in BAD_VALUES])
    for _, message in BAD_VALUES:
        assert message in str(err.value)


def test_all_problems_reported_at_once():
    with pytest.raises(ConfigError) as err:
        compose_job("prepare", ["dedup.threshold=2", "charset.language=xx"])
    msg = str(err.value)
    assert "inputs is empty" in msg and "dedup.threshold=2" in msg and "charset.language='xx'" in msg
