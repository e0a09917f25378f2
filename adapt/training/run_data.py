"""The data one pretrain run trains and evaluates on: packed train sequences through the token cache, the fixed-mask
held-out sets of domain (and general) text, the sampled texts for pseudo-perplexity, the replay split, and the
batch cursors over them."""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from accelerate import PartialState

from adapt.common.errors import ConfigError, InputError
from adapt.config.common import optional_str
from adapt.config.pretrain import PretrainJob
from adapt.training.mlm_loss import FixedMaskEval, MaskingPlan
from adapt.training.packing import BatchCursor, PackedSequences
from adapt.training.token_cache import cache_root, load_packed, sampled_texts


@dataclass
class RunData:
    """Packed token ids (memory-mapped from the token cache); the fixed-mask held-out sets; the texts for
    pseudo-perplexity; the general-text train split replay draws from (None: replay.share=0)."""

    train: PackedSequences
    evals: dict[str, FixedMaskEval]
    pppl_texts: dict[str, list[str]]
    replay: PackedSequences | None = None


def _load_split(corpus_dir: str, split: str, tokenizer, cfg: PretrainJob, key: str) -> PackedSequences:
    state = PartialState()
    seqs = load_packed(corpus_dir, split, tokenizer, cfg.encoder.max_seq_len,
                       cache_root(cfg.out_dir, cfg.data.cache_dir),
                       progress=cfg.runtime.progress and state.is_main_process, state=state)
    if len(seqs) == 0:
        raise InputError(f"{key}={corpus_dir}: the {split} split has no text to train or evaluate on")
    return seqs


def load_run_data(cfg: PretrainJob, tokenizer, plan: MaskingPlan, num_processes: int) -> RunData:
    """Pack the corpus through the token cache: tokenised once (by rank 0), then memory-mapped read-only by
    every process at every start and resume. The cursor picks each process's share of a batch by index, so no
    tensors cross processes."""
    general_dir = optional_str(cfg.general_dir)
    if cfg.masking.unit == "word" and not getattr(tokenizer, "is_fast", False):
        raise ConfigError(f"masking.unit=word needs a fast tokenizer (its word ids mark the words); "
                          f"{tokenizer.name_or_path} has a slow one: use masking.unit=token or a fast tokenizer")
    train = _load_split(cfg.corpus_dir, "train", tokenizer, cfg, "corpus_dir")
    sets = {"domain": (cfg.corpus_dir, _load_split(cfg.corpus_dir, "heldout", tokenizer, cfg, "corpus_dir"))}
    if len(train) < cfg.schedule.batch_size * num_processes:
        raise ConfigError(f"schedule.batch_size={cfg.schedule.batch_size} × {num_processes} process(es) exceeds "
                          f"the {len(train)} packed training sequences in {cfg.corpus_dir}; lower "
                          "schedule.batch_size or add text")
    if cfg.data.order != "shuffled" and not np.isfinite(train.quality).all():
        raise InputError(f"corpus_dir={cfg.corpus_dir}: data.order={cfg.data.order} needs the quality score of "
                         "every train document, and some have none; run adapt-prepare on it or use "
                         "data.order=shuffled")
    replay = None
    if general_dir:
        sets["general"] = (general_dir, _load_split(general_dir, "heldout", tokenizer, cfg, "general_dir"))
        if cfg.replay.share > 0:
            replay = _load_split(general_dir, "train", tokenizer, cfg, "general_dir")
            most = math.ceil(cfg.replay.share * cfg.schedule.batch_size) * num_processes
            if len(replay) < most:
                raise ConfigError(f"replay.share={cfg.replay.share} takes up to {most} sequences a batch, more than "
                                  f"the {len(replay)} in general_dir={general_dir}'s train split; add text or lower "
                                  "replay.share")
    # the same seed draws the same fixed mask at every start and resume, so held-out figures stay comparable
    evals = {name: FixedMaskEval(seqs, plan, cfg.seed, cfg.eval.max_heldout_seqs, cfg.schedule.batch_size)
             for name, (_, seqs) in sets.items()}
    # pseudo-perplexity scores eval.pppl_max_tokens tokens of a seeded random sample: only those documents are kept
    texts = {name: sampled_texts(folder, "heldout", tokenizer, cfg.eval.pppl_max_tokens, cfg.seed)
             for name, (folder, _) in sets.items()}
    return RunData(train, evals, texts, replay)


def batch_cursors(cfg: PretrainJob, data: RunData, rank: int, world_size: int) -> tuple[BatchCursor, BatchCursor | None]:
    """The domain order (data.order) and, with replay on, the general text's own shuffled order."""
    d, batch_size = cfg.data, cfg.schedule.batch_size
    cursor = BatchCursor(len(data.train), batch_size, cfg.seed, rank, world_size, order=d.order,
                         quality=data.train.quality, window_batches=d.window_batches, quality_floor=d.quality_floor)
    if data.replay is None:
        return cursor, None
    most = math.ceil(cfg.replay.share * batch_size)  # rows a batch takes from it at most
    return cursor, BatchCursor(len(data.replay), most, cfg.seed, rank, world_size, salt=0x4E91A)
