"""The data orders of the pretrain loop (data.order) and the replay share, on the cursor alone: vectorised,
thousands of draws in well under a second."""

from __future__ import annotations

import numpy as np
import pytest
import torch

from adapt.training.packing import (
    BatchCursor,
    SequencePacker,
    replay_rows,
    sampling_weights,
)

N, BATCH = 400, 8


def _quality(seed: int = 0) -> np.ndarray:
    return np.random.default_rng(seed).uniform(0, 1, N).astype(np.float32)


def _walk(cursor: BatchCursor, steps: int) -> np.ndarray:
    return np.stack([cursor.next_indices().numpy() for _ in range(steps)])  # (steps, batch)


def _tenths(quality: np.ndarray, rows: np.ndarray) -> tuple[float, float]:
    k = max(len(rows) // 10, 1)
    return float(quality[rows[:k]].mean()), float(quality[rows[-k:]].mean())


def test_quality_desc_goes_from_the_best_down_with_mixed_windows():
    q = _quality()
    cursor = BatchCursor(N, BATCH, seed=0, order="quality_desc", quality=q, window_batches=4)
    rows = _walk(cursor, N // BATCH)  # one epoch
    first, last = _tenths(q, rows)
    assert first > 0.85 and last < 0.15, (first, last)
    assert sorted(rows.ravel().tolist()) == list(range(N)), "one epoch still visits every sequence once"
    # within a window of 4 batches the order is shuffled, across windows it is sorted
    window = 4 * BATCH
    by_rank = np.argsort(np.argsort(-q, kind="stable"), kind="stable")[rows.ravel()]  # 0 = best
    assert (by_rank // window == np.arange(N) // window).all()
    assert not (np.diff(by_rank) > 0).all(), "inside a window the sequences are not in score order"


def test_shuffled_shows_no_trend_and_weighted_favours_high_scores():
    q = _quality()
    rows = _walk(BatchCursor(N, BATCH, seed=0, quality=q), N // BATCH)
    first, last = _tenths(q, rows)
    assert abs(first - last) < 0.15, (first, last)
    weighted = _walk(BatchCursor(N, BATCH, seed=0, order="quality_weighted", quality=q, quality_floor=0.1),
                     20 * N // BATCH).ravel()
    counts = np.bincount(weighted, minlength=N)
    # drawn with replacement: the mean score of the draws is sum(w q) / sum(w), not the corpus mean
    w = np.clip(q, 0.1, 1.0)
    assert abs(q[weighted].mean() - (w * q).sum() / w.sum()) < 0.01
    assert np.corrcoef(q, counts)[0, 1] > 0.8


def test_quality_weighted_respects_the_floor():
    q = np.concatenate([np.zeros(N // 2), np.ones(N // 2)]).astype(np.float32)  # half unscored-bad, half best
    assert torch.equal(sampling_weights(torch.from_numpy(q).double(), 0.25)[:2], torch.tensor([0.25, 0.25],
                                                                                           dtype=torch.float64))
    cursor = BatchCursor(N, BATCH, seed=1, order="quality_weighted", quality=q, quality_floor=0.25)
    rows = _walk(cursor, 50 * N // BATCH).ravel()
    low = np.isin(rows, np.arange(N // 2)).mean()
    # weight 0.25 against 1.0: the low half is drawn 0.25 / 1.25 = 20% of the time (binomial sd ~0.0013)
    assert abs(low - 0.2) < 0.01, low
    assert np.bincount(rows, minlength=N)[: N // 2].min() > 0, "no sequence under the floor is starved"


@pytest.mark.parametrize("order", ["shuffled", "quality_desc", "quality_weighted"])
def test_each_order_resumes_exactly_and_ranks_split_the_global_batch(order):
    q = _quality(2)
    kwargs = {"order": order, "quality": q, "window_batches": 2}
    straight = _walk(BatchCursor(N, BATCH, seed=3, **kwargs), 120)  # crosses two epoch boundaries
    first = BatchCursor(N, BATCH, seed=3, **kwargs)
    head = _walk(first, 70)
    resumed = BatchCursor(N, BATCH, seed=3, **kwargs)
    resumed.load_state_dict(first.state_dict())
    assert np.array_equal(np.concatenate([head, _walk(resumed, 50)]), straight)
    halves = [BatchCursor(N, BATCH // 2, seed=3, rank=r, world_size=2, **kwargs) for r in range(2)]
    split = np.concatenate([_walk(h, 120) for h in halves], axis=1)
    assert np.array_equal(split, straight), "two processes take the two halves of the same global batch"


def test_a_checkpoint_of_another_order_is_refused():
    q = _quality()
    saved = BatchCursor(N, BATCH, seed=0).state_dict()
    with pytest.raises(RuntimeError, match="order"):
        BatchCursor(N, BATCH, seed=0, order="quality_desc", quality=q).load_state_dict(saved)


def test_quality_orders_need_a_score_for_every_sequence():
    q = _quality()
    q[3] = np.nan
    with pytest.raises(RuntimeError, match="finite quality"):
        BatchCursor(N, BATCH, seed=0, order="quality_weighted", quality=q)


@pytest.mark.parametrize("share,batch", [(0.1, 16), (0.25, 4), (0.05, 8), (0.5, 3)])
def test_replay_rows_realise_the_share_at_every_point(share, batch):
    counts = np.array([replay_rows(share, batch, k) for k in range(400)])
    assert counts.min() >= 0 and counts.max() <= int(np.ceil(share * batch))
    realised = np.cumsum(counts) / (batch * np.arange(1, 401))
    assert np.all(np.abs(realised - share) <= 1 / (batch * np.arange(1, 401)) + 1e-12)


def test_a_packed_sequence_scores_the_token_weighted_mean_of_its_documents():
    # body of 8 tokens: doc A (5 ids + separator = 6 tokens, score 0.9), doc B (3 + 1 = 4 tokens, score 0.3)
    packer = SequencePacker(10, cls_id=2, sep_id=3, pad_id=0)
    full = packer.add([[10, 11, 12, 13, 14], [20, 21, 22]], [[1, 0, 1, 1, 0], [1, 1, 0]], [0.9, 0.3])
    assert full.ids.tolist() == [[2, 10, 11, 12, 13, 14, 3, 20, 21, 3]]
    assert full.starts.tolist() == [[1, 1, 0, 1, 1, 0, 1, 1, 1, 1]]
    assert full.quality[0] == pytest.approx((6 * 0.9 + 2 * 0.3) / 8)
    last = packer.finish()  # the carried "22 [SEP]" of doc B
    assert last.real_len == 4 and last.starts.tolist() == [[1, 0, 1, 1, 1, 1, 1, 1, 1, 1]]
    assert last.quality[0] == pytest.approx(0.3)
    unscored = SequencePacker(10, 2, 3, 0).add([[10] * 9], None, [None])
    assert np.isnan(unscored.quality).all() and unscored.starts.all()
