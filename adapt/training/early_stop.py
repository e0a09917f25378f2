"""Early stopping on the domain held-out loss, and the run's best step.

The rule (common practice, as in Prechelt 1998, "Early stopping - but when?", the patience criterion): after each
held-out evaluation, a loss below ``best - min_improvement`` makes this step the best one and resets the count;
any other evaluation adds one to it; the run stops once the count reaches ``patience``. The state (best loss, best
step, count) lives in ``Training`` and in every checkpoint's ``state.json``, so a resumed run decides exactly as
an uninterrupted one.
"""

from __future__ import annotations

from dataclasses import dataclass

LOSS_KEY = "heldout_loss_domain"


@dataclass(frozen=True)
class Verdict:
    improved: bool  # this evaluation is the new best
    evals_since_best: int
    stop: bool  # patience is spent


def judge(loss: float, best_loss: float | None, evals_since_best: int, min_improvement: float,
          patience: int | None) -> Verdict:
    """The decision after one evaluation. ``patience`` None: never stop (the best step is still tracked)."""
    if best_loss is None or loss < best_loss - min_improvement:
        return Verdict(True, 0, False)
    count = evals_since_best + 1
    return Verdict(False, count, patience is not None and count >= patience)


def patience_spent(evals_since_best: int, patience: int | None) -> bool:
    """A run resumed from the checkpoint its early stop wrote goes straight to its end."""
    return patience is not None and evals_since_best >= patience
