"""What a design's folds can show before any model is fitted."""

import numpy as np
import pytest
from scipy import stats

from splitter.errors import InputError
from splitter.partition.assignment import FoldAssignment
from splitter.partition.testability import check_folds


def _assignment(presences_per_fold, background_per_fold=10, gap=None):
    kinds, folds = [], []
    for f, n in enumerate(presences_per_fold, start=1):
        kinds += ["presence"] * n + ["background"] * background_per_fold
        folds += [f] * (n + background_per_fold)
    kw = {}
    if gap is not None:
        kw = dict(gap_rows=np.asarray(gap[0]), gap_folds=np.asarray(gap[1]))
    return FoldAssignment.from_folds(np.arange(1, len(kinds) + 1), np.array(kinds), np.array(folds), **kw)


@pytest.mark.parametrize("n", [1, 3, 8, 20])
@pytest.mark.parametrize("adjust", ["none", "holm"])
def test_binomial_bound_is_where_a_perfect_fold_just_rejects(n, adjust):
    t = check_folds(_assignment([n, n, n, n, n]), alpha=0.05, adjust=adjust)
    bound = t.folds[0].binomial_bound
    level = 0.05 / 5 if adjust == "holm" else 0.05
    # reference: scipy.stats.binom: with all n presences hit, P(X >= n) = a^n equals the level at the bound
    assert stats.binom.sf(n - 1, n, bound) == pytest.approx(level, rel=1e-9)
    assert stats.binom.sf(n - 1, n, min(1.0, bound * 1.01)) > level


def test_partial_roc_omission_flag():
    t = check_folds(_assignment([10, 40]), omission=0.05)
    # analytic: round(0.5 * 10) * 0.05 = 0.25 < 1; round(0.5 * 40) * 0.05 = 1
    assert [f.can_omit for f in t.folds] == [False, True]


def test_small_folds_and_heavy_buffers_warn():
    # Fold 1 holds rows 0..11 (2 presences, then 10 background). The buffer removes rows
    # 0..9 (2 presences, 8 background) from fold 2's calibration set.
    a = _assignment([2, 30], gap=(np.arange(10), np.full(10, 2)))
    t = check_folds(a, adjust="none")
    f2 = t.folds[1]
    # analytic: fold 2's calibration set was fold 1's 12 rows; 10 removed, 2 kept
    assert f2.calibration_records == 2 and f2.calibration_presences == 0
    assert f2.buffer_record_share == pytest.approx(10 / 12)
    assert f2.buffer_presence_share == pytest.approx(1.0)
    text = " ".join(t.warnings())
    # analytic: 0.05 ** (1 / 2) = 0.224
    assert "fold 1 has 2 evaluation presences" in text and "22%" in text
    assert "the buffer removes 83% of fold 2's calibration records" in text


def test_a_fold_without_evaluation_presences_stops():
    with pytest.raises(InputError, match="fold 2 has no evaluation presence.*block_size"):
        check_folds(_assignment([5, 0, 4]))
