"""Part A: freezing curves, their inverse, the closed-layer equilibrium and the refreeze ratio."""

import math

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from courseplan.agents import catalogue
from courseplan.constants import L_FUSION
from courseplan.physics.brine import (
    energy_residual,
    freezing_point,
    liquidus_mass_fraction,
    mixture_equilibrium,
    refreeze_ratio,
    salt_for_melt,
)

AGENTS = list(catalogue())


@pytest.mark.parametrize("agent", AGENTS)
def test_curve_monotone_and_zero_at_zero(agent):
    ag = catalogue()[agent]
    w = np.linspace(0, ag.eutectic_mass_fraction, 2001)
    t = freezing_point(agent, w)
    assert t[0] == 0.0
    assert np.all(np.diff(t) < 0)


@pytest.mark.parametrize("agent", AGENTS)
def test_inverse_round_trip(agent):
    ag = catalogue()[agent]
    w = np.linspace(0.001, ag.eutectic_mass_fraction * 0.999, 300)
    back = liquidus_mass_fraction(agent, freezing_point(agent, w))
    assert np.max(np.abs(back - w)) < 2e-5


def test_out_of_domain_is_nan():
    assert math.isnan(freezing_point("NaCl", -0.01))
    assert math.isnan(freezing_point("NaCl", 0.3))
    assert math.isnan(liquidus_mass_fraction("NaCl", 0.5))
    assert math.isnan(liquidus_mass_fraction("NaCl", -30.0))
    assert liquidus_mass_fraction("NaCl", 0.0) == 0.0


def test_dilute_limit_is_van_t_hoff_with_first_row_coefficient():
    # below the first NaCl row (0.5 %, −0.30 °C) the curve is −n K_f b φ with φ between 1 and the
    # first row's 0.30/(2·1.8607·0.0860): at 0.1 % it lies between the ideal −0.0640 and φ·ideal
    t = freezing_point("NaCl", 0.001)
    b = 0.001 / (0.058443 * 0.999)
    ideal = -2 * 1.8607 * b
    assert ideal <= t <= ideal * 0.30 / (2 * 1.8607 * 0.005 / (0.058443 * 0.995))


def test_refreeze_ratio_nacl_worked_example():
    # dosing-model.md [derived]: NaCl at T_b = −2 °C, w_L ≈ 0.033 → r ≈ 29 kg/kg.
    # By hand: CRC rows 3 % (−1.79) and 4 % (−2.41) give w ≈ 0.03339; 1/w − 1 = 28.95; q/L_f = 0.199.
    assert refreeze_ratio("NaCl", -2.0) == pytest.approx(28.95 + 0.199, abs=0.2)


def test_refreeze_ratio_exothermic_term_negative():
    ca = catalogue()["CaCl2"]
    w = liquidus_mass_fraction(ca, -2.0)
    assert refreeze_ratio(ca, -2.0) == pytest.approx(1 / w - 1 + ca.solution_heat_j_kg / L_FUSION, rel=1e-12)
    assert ca.solution_heat_j_kg < 0


def test_freezing_mixture_reaches_eutectic():
    # dosing-model.md Part A check: ice with a third of its mass of NaCl reaches the NaCl eutectic
    e = mixture_equilibrium("NaCl", 1.0 / 3.0, 1.0, 0.0)
    assert e.at_eutectic
    assert e.temperature_c == pytest.approx(-21.12, abs=1e-9)
    assert e.undissolved_kg > 0
    r = energy_residual("NaCl", e.temperature_c, e.melted_kg, 1 / 3, 1.0, 0.0, e.undissolved_kg)
    assert abs(r) < 1e-6 * L_FUSION
    # the brine formed is at the eutectic mass fraction
    assert (1 / 3 - e.undissolved_kg) / e.brine_kg == pytest.approx(0.2331, abs=1e-9)


def test_tiny_dose_stays_at_zero():
    e = mixture_equilibrium("NaCl", 1e-7, 5.0, 0.5)
    assert -0.01 < e.temperature_c <= 0.0 and not e.at_eutectic
    z = mixture_equilibrium("NaCl", 0.0, 5.0, 0.5)
    assert z.temperature_c == 0.0 and z.melted_kg == 0.0


def test_large_dose_gives_eutectic_with_undissolved_salt():
    e = mixture_equilibrium("KCl", 5.0, 5.0, 0.5)
    assert e.at_eutectic and e.temperature_c == pytest.approx(-10.8) and e.undissolved_kg > 4.0


@pytest.mark.parametrize("agent", AGENTS)
def test_energy_residual_zero_and_on_liquidus(agent):
    rng = np.random.default_rng(7)
    s = 10 ** rng.uniform(-4, -0.5, 2000)
    ice = rng.uniform(0.5, 6.0, 2000)
    water = rng.uniform(0.0, 1.0, 2000)
    e = mixture_equilibrium(agent, s, ice, water)
    ok = np.isfinite(e.temperature_c)
    assert ok.mean() > 0.5
    r = energy_residual(agent, e.temperature_c, e.melted_kg, s, ice, water, e.undissolved_kg)
    assert np.max(np.abs(r[ok]) / (L_FUSION * s[ok])) < 1e-4
    on = ok & ~e.at_eutectic
    assert np.allclose(s[on] / e.brine_kg[on], liquidus_mass_fraction(agent, e.temperature_c[on]), rtol=1e-9)


def test_more_salt_is_colder_and_melts_more():
    s = np.linspace(0.001, 0.3, 200)
    e = mixture_equilibrium("NaCl", s, 5.0, 0.5)
    assert np.all(np.diff(e.temperature_c) <= 1e-12)
    assert np.all(np.diff(e.melted_kg) >= -1e-12)


def test_salt_for_melt_inverts_equilibrium():
    ice, water = np.array([5.1, 3.0, 5.5]), np.array([0.5, 0.2, 0.05])
    melt = 0.1 * ice
    s = salt_for_melt("NaCl", melt, ice, water)
    e = mixture_equilibrium("NaCl", s, ice, water)
    assert np.allclose(e.melted_kg, melt, rtol=1e-6)


def test_salt_for_melt_unreachable_is_inf():
    # KCl's eutectic is −10.8 °C: a saturated brine cannot melt 90 % of the ice
    assert salt_for_melt("KCl", 4.5, 5.0, 0.0) == math.inf
    assert math.isnan(salt_for_melt("NaCl", 6.0, 5.0, 0.0))  # more melt than ice


@settings(max_examples=40, deadline=None)
@given(st.floats(1e-4, 0.5), st.floats(0.1, 6.0), st.floats(0.0, 1.0))
def test_vectorised_equals_scalar(s, ice, water):
    arr = mixture_equilibrium("NaCl", np.array([s, 0.01, s]), np.array([ice, 2.0, ice]),
                              np.array([water, 0.1, water]))
    one = mixture_equilibrium("NaCl", s, ice, water)
    assert isinstance(one.temperature_c, float)
    for field in ("temperature_c", "melted_kg", "undissolved_kg", "brine_kg"):
        a, b = getattr(arr, field)[0], getattr(one, field)
        assert (math.isnan(a) and math.isnan(b)) or a == pytest.approx(b, rel=1e-12, abs=1e-15)
