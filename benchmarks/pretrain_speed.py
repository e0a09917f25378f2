"""MLM training speed near the machine's limit: this project's pretrain step vs a plain library loop, in one run.

Both loops train the packaged encoder (adapt.training.encoder.load_mlm, default EncoderConfig; its missing MLM head
is drawn from a fixed seed, so both start from the same weights) on the invented legal samples
(corpora_samples/legal), batch 16 x 128 tokens, fp32, the same learning-rate schedule (linear warm-up and decay),
gradient clipping at 1.0, and the same number of training tokens. Their steps alternate, so load from other jobs on
a shared machine falls on both alike.

ours:  adapt.stages.pretrain._optimizer_step, the loop's own step: packed sequences (adapt.training.packing),
       MaskingPlan, MaskedOnlyMlm (head, cross-entropy and the encoder's last layer only at masked positions),
       the tied embedding's lookup gradient as sparse rows (sparse_tied_embedding_grad), build_adamw (fused AdamW).
plain: fixed-length chunks of 128 tokens, transformers' DataCollatorForLanguageModeling (mlm_probability 0.15),
       model(**batch) computing vocabulary logits at every position, torch.optim.AdamW with its defaults.

Also measured: the fp32 matmul peak (best of a few large square products; bf16 only where the CPU computes bf16
natively), each loop's model-FLOPs utilisation, the held-out MLM loss of both on the same fixed masked sequences
(and each loop's difference from plain with a 95% paired bootstrap interval over those sequences; ``ours_seed1``
and ``plain_seed1``, the same loops with another seed for masks, batch order and dropout, show how far apart
training noise alone puts two runs of one loop),
and variants of our step: ``ours_no_attention_dropout`` (the same step with the attention-probability
dropout at 0, which lets SDPA use its fused kernel on CPU; trained and scored like the others) and, speed only,
eager attention instead of SDPA, the lookup gradient dense, the last layer at every position, and (--compile)
torch.compile of the loss module.
Prints JSON. Usage: python benchmarks/pretrain_speed.py [--steps 20] [--variant-steps 4] [--threads 0] [--compile]
"""

from __future__ import annotations

import argparse
import json
import os
import subprocess
import time
from pathlib import Path

import numpy as np
import torch
import torch.nn.functional as F
import transformers
from accelerate import Accelerator
from transformers import DataCollatorForLanguageModeling, get_scheduler

from adapt.common.runtime import cpu_bf16_support
from adapt.config.common import EncoderConfig
from adapt.config.pretrain import PretrainJob, ScheduleConfig
from adapt.stages.pretrain import _optimizer_step
from adapt.training.run_data import RunData
from adapt.training.adapters import build_adapter, count_trainable
from adapt.training.encoder import load_mlm, load_tokenizer
from adapt.training.masking import IGNORE_INDEX
from adapt.training.mlm_loss import FixedMaskEval, MaskedOnlyMlm, MaskingPlan, sparse_tied_embedding_grad
from adapt.training.optimizer import build_adamw
from adapt.training.packing import BatchCursor, PackedSequences, SequencePacker
from adapt.training.resume import Training
from adapt.training.token_cache import word_starts

SAMPLES = Path(__file__).resolve().parents[1] / "corpora_samples" / "legal"
BATCH, SEQ, SEED, HELDOUT_DOCS, HELDOUT_SEQS = 16, 128, 0, 40, 48
WARM_STEPS = 2  # untimed (they still train: both loops see the same tokens)


def machine() -> dict:
    lscpu = subprocess.run(["lscpu"], capture_output=True, text=True, check=False).stdout
    model = next((ln.split(":", 1)[1].strip() for ln in lscpu.splitlines() if ln.startswith("Model name")), "")
    return {"cpu": model, "cpu_capability": torch.backends.cpu.get_cpu_capability(), "torch": torch.__version__,
            "transformers": transformers.__version__, "threads": torch.get_num_threads(), "cores": os.cpu_count(),
            "bf16_native": cpu_bf16_support().native, "load_average_start": list(os.getloadavg())}


def matmul_peak(dtype: torch.dtype, size: int = 2048, repeats: int = 5) -> float:
    """Best-of-``repeats`` GFLOP/s of a (size, size) x (size, size) product at the training thread count."""
    g = torch.Generator().manual_seed(0)
    a, b = (torch.randn(size, size, generator=g).to(dtype) for _ in range(2))
    a @ b  # warm-up
    best = min(_seconds(lambda: a @ b) for _ in range(repeats))
    return 2 * size ** 3 / best / 1e9


def _seconds(fn) -> float:
    t0 = time.perf_counter()
    fn()
    return time.perf_counter() - t0


def split_texts() -> tuple[list[str], list[str]]:
    texts = [json.loads(line)["text"] for path in sorted(SAMPLES.glob("*.jsonl"))
             for line in path.read_text(encoding="utf-8").splitlines() if line.strip()]
    order = np.random.default_rng(SEED).permutation(len(texts))
    return [texts[i] for i in order[HELDOUT_DOCS:]], [texts[i] for i in order[:HELDOUT_DOCS]]


def packed(tokenizer, texts: list[str]) -> PackedSequences:
    """Full packed rows only (adapt.training.packing's rule; the padded last row is dropped)."""
    enc = tokenizer(texts, add_special_tokens=False, return_attention_mask=False, return_token_type_ids=False)
    packer = SequencePacker(SEQ, tokenizer.cls_token_id, tokenizer.sep_token_id, tokenizer.pad_token_id)
    rows = packer.add(enc["input_ids"], word_starts(enc))
    return PackedSequences(rows.ids, SEQ, len(texts), rows.starts)


def plain_chunks(tokenizer, texts: list[str]) -> torch.Tensor:
    """The common recipe: each document with its special tokens, concatenated, cut into 128-token chunks."""
    ids = [i for row in tokenizer(texts, return_attention_mask=False, return_token_type_ids=False)["input_ids"]
           for i in row]
    n = len(ids) // SEQ
    return torch.tensor(ids[:n * SEQ]).view(n, SEQ)


class CountingMlm(torch.nn.Module):
    """MaskedOnlyMlm that also counts the positions the decoder runs at (for the FLOP count)."""

    def __init__(self, model, masked_final_layer: bool = True):
        super().__init__()
        self.inner = MaskedOnlyMlm(model, masked_final_layer)
        self.decoded = 0

    def forward(self, input_ids, attention_mask, labels):
        self.decoded += int((labels != IGNORE_INDEX).sum())
        return self.inner(input_ids, attention_mask, labels)


def flop_params(model) -> dict:
    """Weights that do matmuls: encoder linear layers, the head transform, the decoder (hidden x vocab)."""
    body = sum(m.weight.numel() for m in model.bert.encoder.modules() if isinstance(m, torch.nn.Linear))
    transform = model.cls.predictions.transform.dense.weight.numel()
    decoder = model.cls.predictions.decoder.weight.numel()
    return {"encoder_linear": body, "head_transform": transform, "decoder": decoder}


def model_flops(p: dict, tokens: int, decoded: int) -> float:
    """6 x matmul weights x tokens (forward 2 + backward 4), the decoder only where it is computed; attention
    scores (T x T) are not counted (about 3% here)."""
    return 6 * (p["encoder_linear"] + p["head_transform"]) * tokens + 6 * p["decoder"] * decoded


class Ours:
    """The project's optimizer step (adapt.stages.pretrain._optimizer_step) on packed sequences."""

    def __init__(self, tokenizer, train: PackedSequences, schedule: ScheduleConfig, attn: str = "sdpa",
                 compile_module: bool = False, attention_dropout: float | None = None, bf16: bool = False,
                 seed: int = SEED, sparse_lookup: bool = True, masked_final_layer: bool = True):
        self.bf16 = bf16  # bf16 autocast around the step, as the stage's Accelerator(mixed_precision="bf16") does
        self.cfg = PretrainJob(corpus_dir="-", seed=seed, schedule=schedule)  # seed: masks, dropout, batch order
        # attention_dropout: dropout on the attention probabilities (BERT: 0.1), as encoder.attention_dropout sets it
        self.model, _ = load_mlm(self.cfg.encoder, attention_dropout=attention_dropout)
        if attn != self.model.config._attn_implementation:
            self.model.set_attn_implementation(attn)
        self.plan = MaskingPlan(tokenizer, 0.15, 0.8, 0.1)
        self.counting = CountingMlm(self.model, masked_final_layer)
        module = torch.compile(self.counting.inner) if compile_module else None
        if module is not None:
            self.counting.inner = module
        optimizer = build_adamw(self.model, schedule.learning_rate, schedule.weight_decay)
        scheduler = get_scheduler(schedule.decay, optimizer, num_warmup_steps=schedule.warmup_steps,
                                  num_training_steps=schedule.max_steps)
        trainable, total = count_trainable(self.model)
        self.t = Training(build_adapter("full"), self.counting, optimizer, scheduler,
                          BatchCursor(len(train), BATCH, seed), trainable, total, {})
        self.data = RunData(train, {}, {})
        self.accelerator = Accelerator(cpu=True, mixed_precision="no")
        if sparse_lookup:  # as the stage's set-up does for a trainable tied embedding
            sparse_tied_embedding_grad(self.model)
        self.params = [p for p in self.counting.parameters() if p.requires_grad]

    def step(self) -> float:
        with torch.autocast("cpu", dtype=torch.bfloat16, enabled=self.bf16):
            loss, _ = _optimizer_step(self.cfg, self.t, self.data, self.plan, self.accelerator, self.params)
        return loss


class Plain:
    """The library's standard loop: collator masking, full-vocabulary logits, default AdamW."""

    def __init__(self, tokenizer, chunks: torch.Tensor, schedule: ScheduleConfig, seed: int = SEED):
        self.model, _ = load_mlm(EncoderConfig())
        self.model.train()
        self.seed = seed  # masks and chunk order; dropout draws follow the global RNG, seeded in step()
        self.steps = 0
        self.collator = DataCollatorForLanguageModeling(tokenizer, mlm_probability=0.15, seed=seed)
        self.optimizer = torch.optim.AdamW(self.model.parameters(), lr=schedule.learning_rate)
        self.scheduler = get_scheduler(schedule.decay, self.optimizer, num_warmup_steps=schedule.warmup_steps,
                                       num_training_steps=schedule.max_steps)
        self.chunks = chunks
        self.order = torch.randperm(len(chunks), generator=torch.Generator().manual_seed(seed))
        self.position, self.decoded = 0, 0

    def step(self) -> float:
        if self.position + BATCH > len(self.order):
            self.position = 0
        rows = self.order[self.position:self.position + BATCH]
        self.position += BATCH
        batch = self.collator([{"input_ids": r} for r in self.chunks[rows].tolist()])
        torch.manual_seed(self.seed * 100_003 + self.steps)  # dropout: the loops alternate, so each seeds its own
        self.steps += 1
        loss = self.model(**batch).loss
        loss.backward()
        torch.nn.utils.clip_grad_norm_(self.model.parameters(), 1.0)
        self.optimizer.step()
        self.scheduler.step()
        self.optimizer.zero_grad()
        self.decoded += batch["input_ids"].numel()  # logits at every position
        return float(loss.detach())


@torch.no_grad()
def sequence_losses(model, evals: FixedMaskEval) -> tuple[np.ndarray, np.ndarray]:
    """Per held-out sequence: the summed cross-entropy at its masked positions, and their number."""
    model.eval()
    sums, counts = [], []
    for start in range(0, len(evals.input_ids), evals.batch_size):
        sl = slice(start, start + evals.batch_size)
        labels = evals.labels[sl]  # (B, T)
        logits = model(input_ids=evals.input_ids[sl], attention_mask=evals.attention_mask[sl]).logits  # (B, T, V)
        ce = F.cross_entropy(logits.float().transpose(1, 2), labels, ignore_index=IGNORE_INDEX, reduction="none")
        sums.append(ce.sum(dim=1).double().numpy())
        counts.append((labels != IGNORE_INDEX).sum(dim=1).numpy())
    model.train()
    return np.concatenate(sums), np.concatenate(counts)


def mean_loss(losses: tuple[np.ndarray, np.ndarray]) -> float:
    return float(losses[0].sum() / max(losses[1].sum(), 1))


def paired_difference(a: tuple[np.ndarray, np.ndarray], b: tuple[np.ndarray, np.ndarray],
                      resamples: int = 10_000) -> dict:
    """Held-out loss of a minus b on the same masked tokens, with a 95% percentile interval from a paired
    bootstrap (Koehn 2004, "Statistical significance tests for machine translation evaluation": both systems
    scored on the same resampled items). Whole sequences are resampled, since the tokens of one sequence are not
    independent (common practice: a cluster bootstrap)."""
    (sa, counts), (sb, _) = a, b
    idx = np.random.default_rng(SEED).integers(0, len(counts), (resamples, len(counts)))  # (R, n) sequences
    diff = (sa[idx].sum(axis=1) - sb[idx].sum(axis=1)) / counts[idx].sum(axis=1)
    low, high = np.percentile(diff, [2.5, 97.5])
    return {"difference": round(mean_loss(a) - mean_loss(b), 4), "ci95": [round(float(low), 4), round(float(high), 4)],
            "verdict": "better" if high < 0 else ("worse" if low > 0 else "no detectable difference")}


def alternate(loops: dict, steps: int) -> dict:
    """Run the loops' steps in turn; per loop the seconds of each timed step (after WARM_STEPS)."""
    times = {name: [] for name in loops}
    for i in range(steps):
        for name, loop in loops.items():
            seconds = _seconds(loop.step)
            if i >= WARM_STEPS:
                times[name].append(seconds)
    return times


def summary(times: list[float], tokens_per_step: int, flops: float, steps: int, peak: float,
            peak_name: str = "fp32") -> dict:
    seconds = sum(times)
    timed_share = len(times) / steps  # FLOPs of the timed steps only
    return {"tokens_per_s": round(tokens_per_step * len(times) / seconds, 1),
            "median_step_s": round(float(np.median(times)), 3), "timed_steps": len(times),
            "model_tflop_per_step": round(flops / steps / 1e12, 4),
            f"mfu_{peak_name}": round(flops * timed_share / seconds / (peak * 1e9), 3)}


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--steps", type=int, default=20, help="optimizer steps of each loop (the loss comparison)")
    parser.add_argument("--learning-rate", type=float, default=1e-4)
    parser.add_argument("--variant-steps", type=int, default=4, help="timed steps of each speed-only variant")
    parser.add_argument("--compile", action="store_true", help="also time torch.compile (minutes to compile)")
    parser.add_argument("--threads", type=int, default=0, help="torch CPU threads (0 = torch default)")
    args = parser.parse_args()
    os.environ.setdefault("HF_HUB_OFFLINE", "1")
    transformers.logging.set_verbosity_error()
    if args.threads:
        torch.set_num_threads(args.threads)
    out = {"machine": machine(), "batch": BATCH, "seq_len": SEQ, "steps": args.steps, "warm_steps": WARM_STEPS}
    peak = {"fp32_gflops": round(matmul_peak(torch.float32), 1)}
    if out["machine"]["bf16_native"]:
        peak["bf16_gflops"] = round(matmul_peak(torch.bfloat16), 1)
    out["matmul_peak"] = peak

    tokenizer = load_tokenizer(EncoderConfig())
    train_texts, heldout_texts = split_texts()
    train = packed(tokenizer, train_texts)
    plan = MaskingPlan(tokenizer, 0.15, 0.8, 0.1)
    evals = FixedMaskEval(packed(tokenizer, heldout_texts), plan, SEED, HELDOUT_SEQS, BATCH)
    schedule = ScheduleConfig(learning_rate=args.learning_rate, max_steps=args.steps,
                              warmup_steps=max(1, args.steps // 10), batch_size=BATCH)
    loops = {"ours": Ours(tokenizer, train, schedule),
             "ours_no_attention_dropout": Ours(tokenizer, train, schedule, attention_dropout=0.0),
             "plain": Plain(tokenizer, plain_chunks(tokenizer, train_texts), schedule),
             # the same loops with another seed (masks, batch order, dropout): how far apart training noise alone
             # puts two runs of one loop, the yardstick for "equal held-out loss"
             "ours_seed1": Ours(tokenizer, train, schedule, seed=SEED + 1),
             "plain_seed1": Plain(tokenizer, plain_chunks(tokenizer, train_texts), schedule, seed=SEED + 1)}
    if out["machine"]["bf16_native"]:  # the >= 3x target where bf16 is native: our step in bf16 vs plain in fp32
        loops["ours_bf16"] = Ours(tokenizer, train, schedule, bf16=True)
        loops["ours_bf16_no_attention_dropout"] = Ours(tokenizer, train, schedule, attention_dropout=0.0, bf16=True)
    start_loss = mean_loss(sequence_losses(loops["plain"].model, evals))
    times = alternate(loops, args.steps)
    tokens_per_step = BATCH * SEQ
    params = flop_params(loops["ours"].model)
    out["flop_params"] = params
    tokens = tokens_per_step * args.steps
    losses = {}
    out["heldout"] = {"sequences": len(evals.input_ids), "masked_tokens": evals.num_masked,
                      "train_tokens_each": tokens, "loss_at_start": round(start_loss, 4)}
    for name, loop in loops.items():
        decoded = loop.decoded if isinstance(loop, Plain) else loop.counting.decoded
        out[name] = summary(times[name], tokens_per_step, model_flops(params, tokens, decoded), args.steps,
                            *((peak["bf16_gflops"], "bf16") if "bf16" in name else (peak["fp32_gflops"], "fp32")))
        losses[name] = sequence_losses(loop.model, evals)
        out["heldout"][f"loss_{name}"] = round(mean_loss(losses[name]), 4)
    for name in [n for n in loops if n != "plain"]:
        out[f"speedup_{name}_over_plain"] = round(out[name]["tokens_per_s"] / out["plain"]["tokens_per_s"], 2)
        out["heldout"][f"{name}_minus_plain"] = paired_difference(losses[name], losses["plain"])
    out["heldout"]["ours_seed1_minus_ours"] = paired_difference(losses["ours_seed1"], losses["ours"])
    out["heldout"]["ours_seed1_minus_plain_seed1"] = paired_difference(losses["ours_seed1"], losses["plain_seed1"])
    del loops

    # speed only, alternated with our step as the stage runs it (SDPA): eager attention, the tied embedding's lookup
    # gradient dense, the last layer at every position, and (--compile) compiled
    variant_schedule = ScheduleConfig(learning_rate=args.learning_rate, max_steps=args.variant_steps + WARM_STEPS,
                                      warmup_steps=1, batch_size=BATCH)
    variants = {"sdpa": Ours(tokenizer, train, variant_schedule),
                "eager": Ours(tokenizer, train, variant_schedule, attn="eager"),
                "dense_lookup_grad": Ours(tokenizer, train, variant_schedule, sparse_lookup=False),
                "full_last_layer": Ours(tokenizer, train, variant_schedule, masked_final_layer=False)}
    if args.compile:
        variants["compiled"] = Ours(tokenizer, train, variant_schedule, compile_module=True)
        first = time.perf_counter()
        variants["compiled"].step()  # compiles (not a warm-up of the others: it trains one step more)
        out["compile_first_step_s"] = round(time.perf_counter() - first, 1)
    vt = alternate(variants, args.variant_steps + WARM_STEPS)
    out["variants_tokens_per_s"] = {k: round(tokens_per_step * len(v) / sum(v), 1) for k, v in vt.items()}
    out["machine"]["load_average_end"] = list(os.getloadavg())
    # a shared machine only ever slows the product down: the peak is the best of the start and the end of the run
    peak_end = matmul_peak(torch.float32)
    out["matmul_peak"]["fp32_gflops_end"] = round(peak_end, 1)
    if peak_end > peak["fp32_gflops"]:
        scale = peak["fp32_gflops"] / peak_end
        for name in [n for n, v in out.items() if isinstance(v, dict) and "mfu_fp32" in v]:
            out[name]["mfu_fp32"] = round(out[name]["mfu_fp32"] * scale, 3)
    print(json.dumps(out, indent=2))


if __name__ == "__main__":
    main()
