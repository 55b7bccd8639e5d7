"""Calibration round trip: a synthetic patch made with a known k_f is fitted back (design note
dosing-model.md, "What the tests must show": fit on a synthetic patch made with known knobs, get the
knobs back).  The patch's outcomes come from the model itself, so the fit must bracket the knob."""

from __future__ import annotations

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from courseplan.errors import InputError
from courseplan.physics.hold import EnergySeries
from courseplan.physics.patch import fit_refreeze_share, patch_outcomes

LADDER = np.array([10.0, 20.0, 30.0, 40.0, 60.0, 80.0, 120.0, 160.0])


def _series(flux):
    return EnergySeries(np.full(24, float(flux)), 300.0)   # 2 h in 5-min steps


@settings(max_examples=40, deadline=None)
@given(kf=st.floats(0.1, 0.9), flux=st.floats(-80.0, 350.0), lwc=st.floats(2.0, 8.0),
       rho=st.floats(450.0, 620.0))
def test_fit_brackets_the_knob_the_patch_was_made_with(kf, flux, lwc, rho):
    s = _series(flux)
    held = patch_outcomes("NaCl", s, 600.0, lwc, rho, LADDER, refreeze_share=kf)
    fit = fit_refreeze_share("NaCl", s, 600.0, lwc, rho, LADDER, held)
    assert fit.low - 1e-9 <= kf <= fit.high + 1e-9
    if fit.kind == "interval":
        # the bracket is no wider than one rung step of the ladder allows
        assert fit.high - fit.low < 1.0
        assert all(np.isfinite(fit.residuals))


def test_held_only_gives_an_upper_bound_and_soft_only_a_lower_bound():
    s = _series(100.0)
    up = fit_refreeze_share("NaCl", s, 600.0, 5.0, 550.0, [80.0, 120.0], [True, True])
    assert up.kind == "upper bound" and np.isnan(up.value) and up.low == 0.0 and up.high < 1.0
    lo = fit_refreeze_share("NaCl", s, 600.0, 5.0, 550.0, [10.0, 20.0], [False, False])
    assert lo.kind == "lower bound" and np.isnan(lo.value) and lo.high == 1.0


def test_contradictory_or_empty_ladders_are_one_clear_error():
    s = _series(100.0)
    with pytest.raises(InputError, match="below one that went soft"):
        fit_refreeze_share("NaCl", s, 600.0, 5.0, 550.0, [20.0, 40.0], [True, False])
    with pytest.raises(InputError, match="no dose rungs"):
        fit_refreeze_share("NaCl", s, 600.0, 5.0, 550.0, [], [])
    with pytest.raises(InputError, match="positive"):
        fit_refreeze_share("NaCl", s, 600.0, 5.0, 550.0, [-5.0], [True])
