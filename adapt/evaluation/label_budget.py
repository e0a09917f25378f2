"""Label budgets: nested, class-stratified subsets of the training split, the same for every arm and seed."""

from __future__ import annotations

import math
from collections import defaultdict

import numpy as np


def budget_subsets(label_ids: list[int], shares: list[float], seed: int) -> dict[float, list[int]]:
    """Share -> training rows (in file order). Each label's rows are permuted once from ``seed``; a share takes
    the first ceil(share × count) of them, at least one, so every label stays represented, a smaller share's
    rows lie inside every larger share's, and the label proportions follow the full split's (stratified)."""
    by_label: dict[int, list[int]] = defaultdict(list)
    for row, label in enumerate(label_ids):
        by_label[label].append(row)
    rng = np.random.default_rng(seed)
    order = {label: [rows[i] for i in rng.permutation(len(rows))] for label, rows in sorted(by_label.items())}
    return {share: sorted(r for rows in order.values() for r in rows[:max(1, math.ceil(share * len(rows)))])
            for share in shares}
