"""Whole-word masking (masking.unit=word) on rows packed by the token cache's rule, with the tiny WordPiece
tokenizer: words outside its vocabulary are cut into letter pieces, so many words have several tokens."""

from __future__ import annotations

import random

import numpy as np
import pytest
import torch
from transformers import AutoTokenizer

from adapt.training.masking import IGNORE_INDEX, word_groups
from adapt.training.mlm_loss import FixedMaskEval, MaskingPlan
from adapt.training.packing import PackedSequences, SequencePacker
from adapt.training.token_cache import word_starts

WORDS = "the court tenant landlord quartz lease xylem notary ledger rent of and to a in claim verdict".split()


def _packed(tokenizer, n_docs: int = 120, max_seq_len: int = 32, seed: int = 0) -> PackedSequences:
    """Random documents packed exactly as the token cache packs them (word starts from word_ids)."""
    rng = random.Random(seed)
    texts = [" ".join(rng.choice(WORDS) for _ in range(rng.randint(5, 30))) + "." for _ in range(n_docs)]
    enc = tokenizer(texts, add_special_tokens=False, return_attention_mask=False, return_token_type_ids=False)
    packer = SequencePacker(max_seq_len, tokenizer.cls_token_id, tokenizer.sep_token_id, tokenizer.pad_token_id)
    full, last = packer.add(enc["input_ids"], word_starts(enc), [0.5] * n_docs), packer.finish()
    ids = np.concatenate([full.ids, last.ids])
    return PackedSequences(ids, last.real_len, n_docs, np.concatenate([full.starts, last.starts]),
                           np.concatenate([full.quality, last.quality]))


@pytest.fixture
def tokenizer(tiny_encoder):
    return AutoTokenizer.from_pretrained(tiny_encoder)


def _words_of(seqs: PackedSequences, plan: MaskingPlan, rows) -> torch.Tensor:
    ids, mask = seqs.input_ids[rows], seqs.attention_mask[rows]
    special = torch.isin(ids, torch.tensor(plan.special_ids)) | (mask == 0)
    return word_groups(seqs.word_starts[rows], special), special


def _partly_masked(group: torch.Tensor, chosen: torch.Tensor) -> int:
    """Words with some but not all of their tokens chosen (a special position is a word of its own)."""
    c = chosen.long()
    most = torch.zeros_like(c).scatter_reduce(1, group, c, "amax", include_self=False)
    least = torch.ones_like(c).scatter_reduce(1, group, c, "amin", include_self=False)
    present = torch.zeros_like(c).scatter_add_(1, group, torch.ones_like(c)) > 0  # word numbers in use
    return int(((most != least) & present).sum())


def test_word_starts_follow_the_tokenizers_word_ids(tokenizer):
    enc = tokenizer(["quartz rent xylem."], add_special_tokens=False)
    pieces = tokenizer.convert_ids_to_tokens(enc["input_ids"][0])
    starts = word_starts(enc)[0]
    # a piece starts a word exactly where WordPiece does not mark it as a continuation ("##")
    assert starts == [int(not p.startswith("##")) for p in pieces], (pieces, starts)
    assert sum(starts) == 4, "quartz, rent, xylem and the full stop are four words"


def test_no_word_is_ever_partly_masked_and_the_token_rate_holds(tokenizer):
    seqs = _packed(tokenizer)
    plan = MaskingPlan(tokenizer, 0.15, 0.8, 0.1, unit="word")
    rows = torch.arange(len(seqs) - 1)  # full rows
    group, special = _words_of(seqs, plan, rows)
    pieces = torch.zeros(group.shape, dtype=torch.long).scatter_add_(1, group, (~special).long())  # a word's
    multi_piece = (pieces.gather(1, group) > 1) & ~special
    selected_total, real_total, kinds = 0, 0, torch.zeros(3)
    for draw in range(20):
        g = torch.Generator().manual_seed(draw)
        ids, _, masked, labels = plan.apply_rows(seqs, rows, g)
        chosen = labels != IGNORE_INDEX
        assert not chosen[special].any(), "special tokens and padding are never masked"
        assert _partly_masked(group, chosen) == 0, "a word was partly masked"
        selected_total += int(chosen.sum())
        real_total += int((~special).sum())
        kinds += torch.stack([(masked == plan.mask_token_id)[chosen].sum(),
                              ((masked != plan.mask_token_id) & (masked != ids))[chosen].sum(),
                              (masked == ids)[chosen].sum()]).float()
    assert multi_piece.float().mean() > 0.3, "the test text must have many words of several pieces"
    token = MaskingPlan(tokenizer, 0.15, 0.8, 0.1, unit="token")  # the check can fail: single tokens cut words
    assert _partly_masked(group, token.apply_rows(seqs, rows, torch.Generator().manual_seed(0))[3] != -100) > 0
    # Devlin et al. 2019, BERT §3.1 and the original code's whole-word release: the rate is a share of tokens
    assert abs(selected_total / real_total - 0.15) < 0.01, selected_total / real_total
    share = kinds / kinds.sum()  # 80 / 10 / 10 over the selected tokens (same source)
    assert torch.allclose(share, torch.tensor([0.8, 0.1, 0.1]), atol=0.03), share


def test_a_word_cut_at_a_sequence_start_is_a_word_of_its_own():
    # [CLS] ##b ##c d ##e [SEP]: the first pieces continue a word of the sequence before
    starts = torch.tensor([[1, 0, 0, 1, 0, 1]], dtype=torch.bool)
    special = torch.tensor([[1, 0, 0, 0, 0, 1]], dtype=torch.bool)
    assert word_groups(starts, special).tolist() == [[0, 1, 1, 2, 2, 3]]


def test_token_unit_ignores_word_starts_and_word_unit_needs_them(tokenizer):
    seqs = _packed(tokenizer)
    token = MaskingPlan(tokenizer, 0.15, 0.8, 0.1, unit="token")
    rows = torch.arange(8)
    with_starts = token.apply(seqs.input_ids[rows], seqs.attention_mask[rows], torch.Generator().manual_seed(1),
                              seqs.word_starts[rows])
    without = token.apply(seqs.input_ids[rows], seqs.attention_mask[rows], torch.Generator().manual_seed(1))
    assert all(torch.equal(a, b) for a, b in zip(with_starts, without))
    word = MaskingPlan(tokenizer, 0.15, 0.8, 0.1, unit="word")
    with pytest.raises(RuntimeError, match="word starts"):
        word.apply(seqs.input_ids[rows], seqs.attention_mask[rows], torch.Generator().manual_seed(1))


def test_the_fixed_mask_held_out_set_masks_whole_words(tokenizer):
    seqs = _packed(tokenizer, seed=3)
    plan = MaskingPlan(tokenizer, 0.15, 0.8, 0.1, unit="word")
    fixed = FixedMaskEval(seqs, plan, seed=0, max_seqs=16, batch_size=4)
    group, special = _words_of(seqs, plan, slice(0, 16))
    chosen = fixed.labels != IGNORE_INDEX
    assert fixed.num_masked > 0 and not chosen[special].any()
    assert _partly_masked(group, chosen) == 0, "the held-out mask cut a word"
    again = FixedMaskEval(seqs, plan, seed=0, max_seqs=16, batch_size=4)
    assert torch.equal(again.labels, fixed.labels), "the same seed draws the same held-out mask"
