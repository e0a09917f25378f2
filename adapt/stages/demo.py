"""The demo job: prepare -> pretrain -> score -> compare -> report on the invented samples, with timings and
cautions.

It only chains the stages' ``run`` functions with the folder contracts between them; every stage can also be
run alone with its own command.
"""

from __future__ import annotations

import dataclasses
import logging
import time
from pathlib import Path

from adapt.config.demo import DemoJob
from adapt.contracts.manifest import RunFolder
from adapt.common.cautions import CAUTIONS
from adapt.common.io import atomic_write_json

log = logging.getLogger(__name__)


def _timed(timings: dict, name: str, fn, *args):
    start = time.perf_counter()
    result = fn(*args)
    timings[name] = round(time.perf_counter() - start, 1)
    log.info("%s finished in %.1f s", name, timings[name])
    return result


def _paired_lines(cfg: DemoJob, scores: dict, texts: dict) -> list[str]:
    """adapted / base pseudo-perplexity on the same documents, with the paired bootstrap interval."""
    from adapt.evaluation.pppl_paired import paired_ratio

    lines = ["paired ratio adapted / base (same documents; below 1 = adapted better; bootstrap over documents):"]
    for text_name in texts:
        r = paired_ratio(scores[("adapted", text_name)], scores[("base", text_name)],
                         cfg.score.ci.bootstrap_resamples, cfg.score.ci.confidence, cfg.score.seed)
        if not r["comparable"]:
            lines.append(f"  {text_name + ' text':<13} not comparable: {r['reason']}")
        elif r["ci_low"] is None:
            lines.append(f"  {text_name + ' text':<13} {r['ratio']:.3f} on {r['n_docs']} documents")
        else:
            lines.append(f"  {text_name + ' text':<13} {r['ratio']:.3f} ({r['confidence']:.0%} CI {r['ci_low']:.3f}–"
                         f"{r['ci_high']:.3f}) on {r['n_docs']} documents, resampling {r['resampling_unit']}")
    return lines


def run(cfg: DemoJob) -> dict:
    from adapt.stages import compare, prepare, pretrain, report, score

    out = Path(cfg.out_dir)
    folder = RunFolder(out, "demo", cfg, [], cfg.pretrain.seed)
    timings: dict[str, float] = {}
    _timed(timings, "prepare", prepare.run, cfg.prepare)
    _timed(timings, "prepare_general", prepare.run, cfg.prepare_general)
    trained = _timed(timings, "pretrain", pretrain.run, cfg.pretrain)
    if not trained["completed"]:  # stopped (a signal): the same command resumes the pretraining
        folder.finish("stopped", timings_seconds=timings)
        return trained
    run_dir = Path(cfg.pretrain.out_dir)
    arms = {"base": str(run_dir / "base"), "adapted": str(run_dir / "final")}

    scores = {}
    texts = {"domain": cfg.pretrain.corpus_dir, "general": cfg.pretrain.general_dir}
    for arm, checkpoint in arms.items():
        for text_name, corpus in texts.items():
            job = dataclasses.replace(
                cfg.score, texts=str(corpus), out_dir=str(Path(cfg.score.out_dir) / f"{arm}-{text_name}"),
                encoder=dataclasses.replace(cfg.score.encoder, name_or_path=checkpoint, random_init=False))
            scores[(arm, text_name)] = _timed(timings, f"score {arm} on {text_name}", score.run, job)
    comparison = _timed(timings, "compare", compare.run, dataclasses.replace(cfg.compare, arms=arms))
    reported = _timed(timings, "report", report.run, cfg.report)

    summary = [f"demo on the invented {cfg.domain} samples (encoder {cfg.pretrain.encoder.name_or_path})", ""]
    summary += trained["summary"] + [""]
    summary.append("held-out pseudo-perplexity (exact, lower is better; 95% bootstrap CI over documents):")
    for text_name in texts:
        parts = []
        for arm in arms:
            s = scores[(arm, text_name)]
            parts.append(f"{arm} {s['pseudo_perplexity']:.2f} ({s['ci']['low']:.2f}-{s['ci']['high']:.2f})")
        summary.append(f"  {text_name + ' text':<13} " + "   ".join(parts))
    summary += _paired_lines(cfg, scores, texts)
    summary += [""] + comparison["summary"] + [""]
    summary.append("stage times (s): " + ", ".join(f"{k} {v}" for k, v in timings.items()))
    summary.append(f"outputs: {out} (prepared/, pretrain/final/, score/, compare/comparison.md, report/)")
    summary += [""] + CAUTIONS + ["", f"report: {Path(reported['html']).resolve()}"]
    atomic_write_json(out / "demo.json", {"timings_seconds": timings, "scores": {
        f"{a}-{t}": {k: v for k, v in s.items() if k != "per_document"} for (a, t), s in scores.items()},
        "comparison": str(Path(cfg.compare.out_dir) / "comparison.json"), "report": reported["html"]})
    folder.finish("completed", timings_seconds=timings)
    return {"out_dir": str(out), "timings": timings, "summary": summary}
