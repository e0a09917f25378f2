"""The canary stage: a memorisation audit in two steps.

``mode=plant`` copies a prepared corpus into ``cfg.out_dir`` and adds canaries (invented sentences with a random
six-digit secret) to its ``train/`` split, each repeated ``plant.repeats`` times; controls are made alike and never
planted. It writes ``canaries.json`` beside the copy, which pretrain reads as any prepared corpus.

``mode=audit`` ranks each canary's secret among ``audit.candidates`` random secrets under ``encoder`` (the model
pretrained on the planted copy) and writes ``exposure.json``: the exposure of every canary and its mean per repeat
count, against the controls' (``adapt.evaluation.canary``).
"""

from __future__ import annotations

import logging
import shutil
import statistics
from pathlib import Path

import pyarrow as pa
import pyarrow.parquet as pq
import torch
from tqdm.auto import tqdm

from adapt.common.errors import InputError
from adapt.common.io import atomic_write_json, read_json
from adapt.common.runtime import apply_threads
from adapt.config.canary import CanaryJob
from adapt.config.common import PACKAGED_ENCODER
from adapt.contracts.manifest import RunFolder
from adapt.contracts.model_folder import resolve_model_folder
from adapt.contracts.prepared_corpus import SHARD_GLOB, split_shards
from adapt.evaluation.canary import Canary, candidates, exposure, make_canaries, secret_scores
from adapt.training.encoder import KEY, load_mlm, load_tokenizer

log = logging.getLogger(__name__)

CANARIES = "canaries.json"
EXPOSURE = "exposure.json"
CANARY_SHARD = "part-canaries.parquet"
READING = ("Exposure is in bits; a secret the model has not learnt scores about 1.44 on average, the controls "
           "show this model's baseline, and log2(candidates + 1) means the secret ranked first. A planted canary "
           "well above the controls was memorised: a real rare string (a name with an identifier, an account "
           "number) repeated as often in the corpus is at the same risk.")


def run(cfg: CanaryJob) -> dict:
    apply_threads(cfg.runtime)
    return plant(cfg) if cfg.mode == "plant" else audit(cfg)


def _canary_rows(cans: list[Canary], schema: pa.Schema, quality: float | None, first_cluster: int) -> pa.Table:
    planted = [c for c in cans if c.repeats]
    rows = [(c, k) for c in planted for k in range(c.repeats)]
    values = {"id": [f"{c.id}-{k}" for c, k in rows], "text": [c.text for c, _ in rows],
              "source": ["canary"] * len(rows), "quality": [quality] * len(rows),
              "cluster_id": [first_cluster + planted.index(c) for c, _ in rows],
              "cluster_size": [c.repeats for c, _ in rows], "words": [len(c.text.split()) for c, _ in rows]}
    columns = {f.name: pa.array(values.get(f.name, [None] * len(rows)), type=f.type) for f in schema}
    return pa.table(columns, schema=schema)


def plant(cfg: CanaryJob) -> dict:
    src, out = Path(cfg.corpus), Path(cfg.out_dir)
    train, heldout = split_shards(src, "train"), split_shards(src, "heldout")
    folder = RunFolder(out, "canary", cfg, inputs=[src], seed=cfg.seed)
    try:
        for split, shards in (("train", train), ("heldout", heldout)):
            (out / split).mkdir(parents=True, exist_ok=True)
            for stale in (out / split).glob(SHARD_GLOB):
                stale.unlink()
            for shard in shards:
                shutil.copyfile(shard, out / split / shard.name)
        schema = pq.read_schema(train[0])
        table = pq.read_table(train, columns=[c for c in ("quality", "cluster_id") if c in schema.names])
        quality = (statistics.median(q for q in table.column("quality").to_pylist() if q is not None)
                   if "quality" in table.column_names and table.num_rows else None)
        top = max((c for c in table.column("cluster_id").to_pylist() if c is not None), default=-1) \
            if "cluster_id" in table.column_names else -1
        cans = make_canaries(list(cfg.plant.repeats), cfg.plant.per_repeat, cfg.plant.controls, cfg.seed)
        pq.write_table(_canary_rows(cans, schema, quality, top + 1), out / "train" / CANARY_SHARD)
        result = {"corpus": str(src), "canaries": [vars(c) | {"text": c.text} for c in cans],
                  "planted_rows": sum(c.repeats for c in cans), "template_note":
                  "invented sentences with random secrets; nothing real is planted"}
        atomic_write_json(out / CANARIES, result)
    except BaseException:
        folder.finish(status="failed")
        raise
    folder.finish(planted_rows=result["planted_rows"])
    result["summary"] = [
        f"planted {sum(1 for c in cans if c.repeats)} canaries ({result['planted_rows']} rows, repeats "
        f"{sorted(set(cfg.plant.repeats))}) and kept {cfg.plant.controls} controls; corpus copy: {out}",
        f"next: adapt-pretrain corpus_dir={out} ..., then adapt-canary mode=audit planted={out} "
        "encoder.name_or_path=<the run folder>"]
    return result


def _read_canaries(planted: str) -> list[Canary]:
    path = Path(planted) / CANARIES
    if not path.is_file():
        raise InputError(f"planted={planted}: no {CANARIES}; give the out_dir of adapt-canary mode=plant")
    data = read_json(path)
    try:
        return [Canary(c["id"], c["tag"], c["secret"], int(c["repeats"])) for c in data["canaries"]]
    except (KeyError, TypeError, ValueError) as exc:
        raise InputError(f"{path}: not a canary list written by adapt-canary ({exc}); run mode=plant again") from exc


def audit(cfg: CanaryJob) -> dict:
    cans = _read_canaries(cfg.planted)
    path = resolve_model_folder(cfg.encoder.name_or_path, KEY)
    inputs = [Path(cfg.planted) / CANARIES] + ([] if cfg.encoder.name_or_path == PACKAGED_ENCODER else [Path(path)])
    folder = RunFolder(cfg.out_dir, "canary", cfg, inputs=inputs, seed=cfg.seed)
    try:
        tokenizer = load_tokenizer(cfg.encoder)
        with torch.random.fork_rng():
            torch.manual_seed(cfg.seed)
            model, report = load_mlm(cfg.encoder, path)
        if report.needs_warmup:
            raise InputError(f"encoder.name_or_path={cfg.encoder.name_or_path}: the MLM head is untrained, so "
                             "secrets cannot be ranked; audit the final/ of the pretrain run on the planted corpus")
        rows = []
        for c in tqdm(cans, desc="canaries", unit="canary", disable=not cfg.runtime.progress):
            scores = secret_scores(model, tokenizer, c.tag, [c.secret] + candidates(c, cfg.audit.candidates,
                                                                                    cfg.seed), cfg.audit.batch_size)
            rows.append({"id": c.id, "repeats": c.repeats, **exposure(scores[0], scores[1:])})
        by_repeat = {str(r): statistics.fmean(x["exposure"] for x in rows if x["repeats"] == r)
                     for r in sorted({c.repeats for c in cans})}
        result = {"encoder": cfg.encoder.name_or_path, "planted": cfg.planted, "canaries": rows,
                  "mean_exposure_by_repeats": by_repeat, "controls_mean_exposure": by_repeat.get("0"),
                  "max_exposure": rows[0]["max_exposure"] if rows else None, "reading": READING}
        atomic_write_json(Path(cfg.out_dir) / EXPOSURE, result)
    except BaseException:
        folder.finish(status="failed")
        raise
    folder.finish(controls_mean_exposure=result["controls_mean_exposure"])
    lines = [f"exposure in bits (max {result['max_exposure']:.2f} with {cfg.audit.candidates} candidates):"]
    for r, value in by_repeat.items():
        name = "controls (never planted)" if r == "0" else f"planted x{r}"
        lines.append(f"  {name:<26} mean {value:.2f}")
    result["summary"] = lines + [READING, f"written to {Path(cfg.out_dir) / EXPOSURE}"]
    return result
