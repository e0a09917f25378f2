"""The early-stopping rule: the patience criterion (Prechelt 1998, "Early stopping - but when?", section 2) with a
minimum improvement (common practice, as Keras' EarlyStopping min_delta)."""

from adapt.training.early_stop import judge, patience_spent


def _replay(losses, min_improvement, patience):
    best, count, decisions = None, 0, []
    for loss in losses:
        v = judge(loss, best, count, min_improvement, patience)
        count = v.evals_since_best
        best = loss if v.improved else best
        decisions.append((v.improved, v.stop))
        if v.stop:
            break
    return decisions


def test_patience_counts_evaluations_without_improvement_and_an_improvement_resets_it():
    # worked by hand: 3.0 first (best); 2.95 falls by less than 0.1 (1); 2.5 improves (reset); 2.45, 2.6 (1, 2: stop)
    assert _replay([3.0, 2.95, 2.5, 2.45, 2.6, 1.0], 0.1, 2) == [
        (True, False), (False, False), (True, False), (False, False), (False, True)]


def test_without_patience_the_best_is_tracked_but_never_stops():
    assert _replay([3.0, 3.1, 3.2, 2.0], 0.0, None) == [(True, False), (False, False), (False, False), (True, False)]
    assert judge(2.0, 2.0, 0, 0.0, 1).improved is False  # an equal loss is no improvement


def test_a_spent_patience_is_recognised_on_resume():
    assert patience_spent(2, 2) and not patience_spent(1, 2) and not patience_spent(5, None)
