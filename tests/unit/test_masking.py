"""Masking statistics against the BERT rule (Devlin et al. 2019, BERT §3.1: 15% selected; 80% mask token,
10% random token, 10% unchanged), under a fixed generator."""

from __future__ import annotations

import torch

from adapt.common.seeding import step_seed
from adapt.training.masking import IGNORE_INDEX, mask_tokens, replacement_ids

VOCAB, MASK_ID, SPECIAL = 1000, 4, [0, 1, 2, 3, 4]


def _batch(n_rows=400, n_cols=128, seed=0):
    g = torch.Generator().manual_seed(seed)
    ids = torch.randint(5, VOCAB, (n_rows, n_cols), generator=g)
    ids[:, 0], ids[:, -1] = 2, 3  # CLS ... SEP
    ids[:10, 100:] = 0  # padding tail
    special = torch.isin(ids, torch.tensor(SPECIAL))
    return ids, special


def _mask(ids, special, seed=1, rate=0.15, mask_share=0.8, random_share=0.1):
    return mask_tokens(ids, special, rate=rate, mask_share=mask_share, random_share=random_share,
                       mask_token_id=MASK_ID, random_ids=replacement_ids(VOCAB, SPECIAL),
                       generator=torch.Generator().manual_seed(seed))


def test_rates_follow_the_bert_rule():
    ids, special = _batch()
    masked, labels = _mask(ids, special)
    selected = labels != IGNORE_INDEX
    n_candidates = int((~special).sum())
    n_sel = int(selected.sum())
    # tolerances: ~4 binomial standard deviations for these sample sizes (common practice)
    assert abs(n_sel / n_candidates - 0.15) < 0.005
    share_mask = float((masked[selected] == MASK_ID).float().mean())
    share_same = float((masked[selected] == ids[selected]).float().mean())
    share_random = 1 - share_mask - share_same
    assert abs(share_mask - 0.8) < 0.015
    # a random replacement can hit the original token with probability 1/995: counted as unchanged
    assert abs(share_same - 0.1) < 0.012 and abs(share_random - 0.1) < 0.012


def test_labels_only_at_selected_positions_and_special_tokens_never_masked():
    ids, special = _batch()
    masked, labels = _mask(ids, special, rate=0.5)
    assert torch.all(labels[special] == IGNORE_INDEX)
    assert torch.equal(masked[special], ids[special])
    changed = masked != ids
    assert torch.all(labels[changed] == ids[changed]), "every changed token must carry its original as label"
    assert torch.all(masked[(labels == IGNORE_INDEX)] == ids[(labels == IGNORE_INDEX)])


def test_random_replacements_never_use_special_tokens():
    ids, special = _batch()
    masked, labels = _mask(ids, special, rate=0.9, mask_share=0.0, random_share=1.0)
    selected = labels != IGNORE_INDEX
    assert not torch.isin(masked[selected], torch.tensor(SPECIAL)).any()


def test_same_generator_seed_same_mask_and_different_seed_differs():
    ids, special = _batch()
    a, _ = _mask(ids, special, seed=7)
    b, _ = _mask(ids, special, seed=7)
    c, _ = _mask(ids, special, seed=8)
    assert torch.equal(a, b) and not torch.equal(a, c)


def test_step_seed_is_stable_and_distinct():
    assert step_seed(0, 1, 2) == step_seed(0, 1, 2)
    assert len({step_seed(0, s, m) for s in range(50) for m in range(4)}) == 200
