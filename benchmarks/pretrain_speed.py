"""Training throughput of one MLM step on the packaged encoder: a plain library step vs ours.

plain: AutoModelForMaskedLM(labels=...) computes the vocabulary logits at every position, fp32, default AdamW.
ours:  MaskedOnlyMlm (head only at masked positions) and fused AdamW, as in adapt.pretrain; fp32 and bf16.
Prints JSON: tokens/s per variant and the speed-up over the plain step. Usage: python benchmarks/pretrain_speed.py
"""

from __future__ import annotations

import contextlib
import json
import time

import torch
import transformers

from adapt.config.common import EncoderConfig
from adapt.training.encoder import load_mlm, load_tokenizer
from adapt.training.mlm_loss import MaskedOnlyMlm, MaskingPlan

BATCH, SEQ, STEPS, WARM = 16, 128, 6, 2


def measure(step_fn) -> float:
    for _ in range(WARM):
        step_fn()
    start = time.perf_counter()
    for _ in range(STEPS):
        step_fn()
    return BATCH * SEQ * STEPS / (time.perf_counter() - start)


def main() -> None:
    transformers.logging.set_verbosity_error()
    torch.manual_seed(0)
    tok = load_tokenizer(EncoderConfig())
    model, _ = load_mlm(EncoderConfig())
    ids = torch.randint(1000, len(tok), (BATCH, SEQ))
    ids[:, 0], ids[:, -1] = tok.cls_token_id, tok.sep_token_id
    mask = torch.ones_like(ids)
    plan = MaskingPlan(tok, 0.15, 0.8, 0.1)
    masked, labels = plan.apply(ids, mask, torch.Generator().manual_seed(0))
    opt = torch.optim.AdamW(model.parameters(), lr=1e-5)
    fused_opt = torch.optim.AdamW(model.parameters(), lr=1e-5, fused=True)
    module = MaskedOnlyMlm(model).train()

    def plain():
        model(input_ids=masked, attention_mask=mask, labels=labels).loss.backward()
        opt.step(); opt.zero_grad()

    def ours(bf16: bool):
        ctx = torch.autocast("cpu", dtype=torch.bfloat16) if bf16 else contextlib.nullcontext()
        with ctx:
            loss = module(masked, mask, labels)
        loss.backward()
        fused_opt.step(); fused_opt.zero_grad()

    results = {"batch": BATCH, "seq_len": SEQ, "threads": torch.get_num_threads(),
               "plain_fp32_tokens_per_s": measure(plain),
               "ours_fp32_tokens_per_s": measure(lambda: ours(False)),
               "ours_bf16_tokens_per_s": measure(lambda: ours(True))}
    for k in ("ours_fp32", "ours_bf16"):
        results[f"{k}_speedup"] = results[f"{k}_tokens_per_s"] / results["plain_fp32_tokens_per_s"]
    print(json.dumps({k: round(v, 2) if isinstance(v, float) else v for k, v in results.items()}, indent=2))


if __name__ == "__main__":
    main()
