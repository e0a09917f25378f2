"""Exact pseudo-perplexity throughput on the packaged encoder: fp32 vs bf16 autocast, head at the masked position
only vs full forward (vocabulary logits at every position).

The packaged encoder has no trained MLM head, so the pseudo-perplexity figures are meaningless as quality; they
are printed only to show that the four settings agree. Prints JSON. Usage:
    python benchmarks/pppl_speed.py [--max-tokens 300] [--batch-size 64] [--threads 0] [--repeats 2]
Each setting is measured --repeats times after one untimed warm-up pass; the best run is reported (shared
machines add noise only upwards).
"""

from __future__ import annotations

import argparse
import json
import os
import platform

import torch
import transformers

from adapt.config.common import EncoderConfig
from adapt.training.encoder import load_mlm, load_tokenizer
from adapt.evaluation.pppl import pseudo_perplexity, score_documents

# Invented text in the style of the project's sample domains.
TEXTS = [
    "The tenant served notice on the landlord under clause 14.2 of the lease, claiming that the premises had been "
    "unfit for habitation since the flood in March. The landlord denied liability and withheld the deposit.",
    "On appeal, the court held that the arbitration clause did not cover claims in tort, and remitted the matter "
    "to the county court for a fresh hearing on damages, with costs reserved.",
    "Patient admitted to ward 7 with shortness of breath and a productive cough; chest radiograph showed right "
    "lower lobe consolidation. Started on oral amoxicillin, oxygen saturation improved to 96% on room air.",
    "The nurse reduced the insulin dose after two hypoglycaemic episodes overnight, and the discharge summary "
    "asked the general practitioner to review renal function within two weeks.",
    "Under the supply contract, the buyer may terminate for material breach if the seller fails to remedy the "
    "defect within thirty days of written notice; liability is capped at the price paid in the preceding year.",
    "Follow-up echocardiogram: left ventricular ejection fraction 45%, mild mitral regurgitation, no pericardial "
    "effusion. Continue bisoprolol and ramipril; recheck potassium and creatinine in one week.",
    "The employment tribunal found that the dismissal was procedurally unfair because the employer had not "
    "followed its own disciplinary policy, but reduced the compensatory award by half for contributory conduct.",
    "Wound review on day five: edges well apposed, minimal serous ooze, no erythema. Dressing changed; sutures to "
    "be removed by the practice nurse on day ten unless signs of infection develop.",
]


def _cpu_name() -> str:
    try:
        with open("/proc/cpuinfo", encoding="utf-8") as fh:
            return next((ln.split(":", 1)[1].strip() for ln in fh if ln.startswith("model name")), "")
    except OSError:
        return platform.processor()


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--max-tokens", type=int, default=300)
    parser.add_argument("--batch-size", type=int, default=64)
    parser.add_argument("--threads", type=int, default=0, help="torch CPU threads (0 = torch default)")
    parser.add_argument("--repeats", type=int, default=2)
    args = parser.parse_args()
    os.environ.setdefault("HF_HUB_OFFLINE", "1")
    transformers.logging.set_verbosity_error()
    if args.threads:
        torch.set_num_threads(args.threads)
    cfg = EncoderConfig()
    tokenizer = load_tokenizer(cfg)
    torch.manual_seed(0)  # the missing head weights are drawn at load time; fixed so runs agree
    model, _ = load_mlm(cfg)
    runs = []
    for precision in ("fp32", "bf16"):
        for masked_head_only in (True, False):
            def measure(max_tokens: int):
                return score_documents(model, tokenizer, TEXTS, max_seq_len=cfg.max_seq_len,
                                       batch_size=args.batch_size, precision=precision, max_tokens=max_tokens,
                                       masked_head_only=masked_head_only)

            measure(args.batch_size)  # warm-up: one batch
            scores = min((measure(args.max_tokens) for _ in range(args.repeats)), key=lambda s: s.seconds)
            runs.append({"precision": precision, "head": "masked_only" if masked_head_only else "full_forward",
                         "tokens": scores.total_tokens, "seconds": round(scores.seconds, 2),
                         "tokens_per_second": round(scores.total_tokens / scores.seconds, 1),
                         "pseudo_perplexity_untrained_head": round(pseudo_perplexity(scores), 1)})
    speed = {(r["precision"], r["head"]): r["tokens_per_second"] for r in runs}
    print(json.dumps({
        "encoder": cfg.name_or_path, "max_seq_len": cfg.max_seq_len, "batch_size": args.batch_size,
        "torch_threads": torch.get_num_threads(), "torch": torch.__version__, "cpu": _cpu_name(),
        "runs": runs,
        "speedup_masked_only_vs_full_fp32": round(speed["fp32", "masked_only"] / speed["fp32", "full_forward"], 2),
        "speedup_bf16_vs_fp32_masked_only": round(speed["bf16", "masked_only"] / speed["fp32", "masked_only"], 2),
    }, indent=2))


if __name__ == "__main__":
    main()
