"""Exact pseudo-perplexity: adapt.evaluation.pppl.score_documents vs a naive loop, on the same texts in one run.

ours:  score_documents as the score stage runs it (masked copies in batches, the MLM head only at each copy's
       masked position), fp32.
naive: one masked position per forward, batch 1, the full forward computing vocabulary logits at every position,
       fp32; log-softmax at the masked position.
Both score the packaged encoder, whose MLM head is missing and drawn from a fixed seed at load time
(adapt.training.encoder.load_mlm), so the values are meaningless as quality but must agree. Every text fits in one
window, so both see the same context. Prints JSON: both times (best of --repeats after one warm-up), the speed-up
and the largest relative difference of the per-document pseudo-log-likelihoods and of the pseudo-perplexity.
Usage: python benchmarks/pppl_speed.py [--repeats 1] [--batch-size 64] [--threads 0]
"""

from __future__ import annotations

import argparse
import json
import os
import subprocess
import time

import numpy as np
import torch
import transformers

from adapt.config.common import EncoderConfig
from adapt.evaluation.pppl import pseudo_perplexity, score_documents
from adapt.training.encoder import load_mlm, load_tokenizer

# Invented text in the style of the project's sample domains (no real people, firms or cases).
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


def naive_pll(model, tokenizer, texts: list[str]) -> np.ndarray:
    """Per text: Σ log P(w_t | text with w_t masked), one full forward per scored token (Salazar et al. 2020 §2)."""
    special = set(tokenizer.all_special_ids)
    out = np.zeros(len(texts), dtype=np.float64)
    with torch.inference_mode():
        for d, text in enumerate(texts):
            ids = torch.tensor(tokenizer(text)["input_ids"])  # [CLS] ... [SEP]
            for t in range(len(ids)):
                if int(ids[t]) in special:
                    continue
                masked = ids.clone()
                masked[t] = tokenizer.mask_token_id
                logits = model(input_ids=masked[None]).logits[0]  # (T, V): every position
                out[d] += float(torch.log_softmax(logits[t], dim=-1)[ids[t]])
    return out


def best_of(repeats: int, fn):
    fn()  # warm-up
    runs = []
    for _ in range(repeats):
        t0 = time.perf_counter()
        value = fn()
        runs.append((time.perf_counter() - t0, value))
    return min(runs, key=lambda r: r[0])


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--repeats", type=int, default=1)
    parser.add_argument("--batch-size", type=int, default=64)
    parser.add_argument("--threads", type=int, default=0, help="torch CPU threads (0 = torch default)")
    args = parser.parse_args()
    os.environ.setdefault("HF_HUB_OFFLINE", "1")
    transformers.logging.set_verbosity_error()
    if args.threads:
        torch.set_num_threads(args.threads)
    lscpu = subprocess.run(["lscpu"], capture_output=True, text=True, check=False).stdout
    load_start = list(os.getloadavg())
    cfg = EncoderConfig()
    tokenizer = load_tokenizer(cfg)
    model, _ = load_mlm(cfg)
    model.eval()
    ours_s, scores = best_of(args.repeats, lambda: score_documents(model, tokenizer, TEXTS, max_seq_len=cfg.max_seq_len,
                                                                   batch_size=args.batch_size, precision="fp32"))
    naive_s, naive = best_of(args.repeats, lambda: naive_pll(model, tokenizer, TEXTS))
    tokens = scores.total_tokens
    naive_pppl = float(np.exp(-naive.sum() / tokens))
    ours_pppl = pseudo_perplexity(scores)
    print(json.dumps({
        "cpu": next((ln.split(":", 1)[1].strip() for ln in lscpu.splitlines() if ln.startswith("Model name")), ""),
        "cpu_capability": torch.backends.cpu.get_cpu_capability(), "torch": torch.__version__,
        "threads": torch.get_num_threads(), "load_average_start": load_start,
        "load_average_end": list(os.getloadavg()), "texts": len(TEXTS), "scored_tokens": tokens,
        "batch_size": args.batch_size,
        "ours_s": round(ours_s, 3), "naive_s": round(naive_s, 3),
        "ours_tokens_per_s": round(tokens / ours_s, 1), "naive_tokens_per_s": round(tokens / naive_s, 1),
        "speedup": round(naive_s / ours_s, 2),
        "max_rel_diff_doc_pll": float(np.max(np.abs(scores.pll - naive) / np.abs(naive))),
        "rel_diff_pppl": abs(ours_pppl - naive_pppl) / naive_pppl,
        "pppl_untrained_head": round(ours_pppl, 2),
    }, indent=2))


if __name__ == "__main__":
    main()
