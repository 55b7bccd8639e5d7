"""Parts B–E: water to remove, dose, passes, verdicts, calibration and sampling."""

import math

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from courseplan.errors import InputError
from courseplan.physics import dose as D
from courseplan.physics.brine import mixture_equilibrium, refreeze_ratio


def test_water_to_remove_by_hand():
    # θ 5 %, d 0.04 m, k_f 0.5: 0.5·999.84·0.05·0.04 = 0.99984 kg/m²; + 333.4 kJ/m² melts 1 kg/m²
    assert D.water_to_remove_kg_m2(5.0, 0.04, 0.5, 0.0) == pytest.approx(0.99984)
    assert D.water_to_remove_kg_m2(5.0, 0.04, 0.5, 333.4e3) == pytest.approx(1.99984)
    assert D.water_to_remove_kg_m2(5.0, 0.04, 0.5, -1e6) == pytest.approx(0.99984)  # floored


def test_salt_dose_is_water_over_refreeze_ratio():
    assert D.salt_dose_kg_m2("NaCl", 2.9, -2.0) == pytest.approx(2.9 / refreeze_ratio("NaCl", -2.0))


def test_layer_water_ice():
    w, i = D.layer_water_ice(5.0, 560.0, 0.01)
    assert w == pytest.approx(0.49992) and i == pytest.approx(5.6 - 0.49992)


def test_passes_needed():
    n = D.passes_needed([0.1, 0.25, 0.0, 0.3], [0.1, 0.1, 0.1, math.inf])
    np.testing.assert_array_equal(n, [1, 3, 0, 1])


def test_max_salt_per_pass_meets_slush_limit():
    smax = D.max_salt_per_pass_kg_m2("NaCl", 5.0, 560.0, 0.01, 0.10)
    w, i = D.layer_water_ice(5.0, 560.0, 0.01)
    e = mixture_equilibrium("NaCl", smax, i, w)
    assert e.melted_kg == pytest.approx(0.10 * i, rel=1e-6)
    e2 = mixture_equilibrium("NaCl", 0.9 * smax, i, w)
    assert e2.melted_kg < 0.10 * i


def test_cold_balance_consistent_with_parts():
    cb = D.cold_balance("NaCl", 5.0, 560.0, 1e6, depth_m=0.04, refreeze_share=0.5, brine_exit_temp_c=-2.0)
    x = 0.99984 + 1e6 / 333.4e3
    assert cb.water_to_remove_kg_m2 == pytest.approx(x)
    assert cb.salt_kg_m2 == pytest.approx(x / refreeze_ratio("NaCl", -2.0))
    assert cb.product_g_m2 == pytest.approx(cb.salt_kg_m2 / 0.95 * 1000)
    assert cb.passes == math.ceil(cb.salt_kg_m2 / cb.max_salt_per_pass_kg_m2)
    assert cb.pass_temp_c < 0


def test_crystal_water_lowers_salt_need():
    # CaCl2 flake brings 0.23/0.77 kg water per kg salt into the brine: r is smaller by that much
    a = D.cold_balance("CaCl2.2H2O", 5.0, 560.0, 0.0, with_passes=False)
    b = D.cold_balance("CaCl2.2H2O", 5.0, 560.0, 0.0, with_passes=False, purity=1.0)
    assert b.salt_kg_m2 < a.salt_kg_m2  # purity 1: no crystal water counted, larger r


@pytest.mark.parametrize("lwc, rho, ts, grain, x, n, expected", [
    (5.0, 560, 0, "MF", 1.0, 1, "treat"),
    (5.0, 560, 0, "MF", 1.0, 2, "treat-in-passes"),
    (0.99, 560, 0, "MF", 1.0, 1, "water-first"),
    (1.0, 560, 0, "MF", 1.0, 1, "treat"),
    (15.01, 560, 0, "MF", 1.0, 1, "slush"),
    (15.0, 560, 0, "MF", 1.0, 1, "treat"),
    (5.0, 349, 0, "MF", 1.0, 1, "new-snow"),
    (5.0, 560, 0, "PP", 1.0, 1, "new-snow"),
    (0.0, 560, -1.0, "RG", 0.0, 0, "too-cold"),
    (5.0, 560, 0, "MF", 0.0, 0, "no-need"),
])
def test_verdict_boundaries(lwc, rho, ts, grain, x, n, expected):
    assert D.verdicts([lwc], [rho], [ts], [grain], [x], [n])[0] == expected
    assert expected in D.VERDICTS and D.VERDICTS[expected]


def test_verdict_names_are_kebab_case_with_one_line_advice():
    for name, advice in D.VERDICTS.items():
        assert name == name.lower() and " " not in name
        assert "\n" not in advice and advice.endswith(".")


@pytest.mark.parametrize("t_b", [-1.0, -3.0, -6.0])
def test_calibration_round_trip_brine_exit(t_b):
    cb = D.cold_balance("NaCl", 6.0, 560.0, 0.8e6, brine_exit_temp_c=t_b, with_passes=False)
    cal = D.calibrate_patch("NaCl", lwc_pct=6.0, dose_g_m2=cb.product_g_m2, energy_in_mj_m2=0.8,
                            outcome="just-held")
    assert cal.parameter == "brine_exit_temp_c" and cal.bound == "equal"
    assert cal.value == pytest.approx(t_b, abs=0.01)


def test_calibration_round_trip_refreeze_share():
    cb = D.cold_balance("NH4NO3", 4.0, 560.0, 0.5e6, refreeze_share=0.7, with_passes=False)
    cal = D.calibrate_patch("NH4NO3", lwc_pct=4.0, dose_g_m2=cb.product_g_m2, energy_in_mj_m2=0.5,
                            fit="refreeze_share", outcome="held")
    assert cal.value == pytest.approx(0.7, abs=1e-6) and cal.bound == "upper"


def test_calibration_bounds_and_errors():
    held = D.calibrate_patch("NaCl", lwc_pct=5.0, dose_g_m2=60.0, outcome="held")
    soft = D.calibrate_patch("NaCl", lwc_pct=5.0, dose_g_m2=60.0, outcome="soft")
    assert held.bound == "lower" and soft.bound == "upper" and held.value == soft.value
    with pytest.raises(InputError):
        D.calibrate_patch("NaCl", lwc_pct=5.0, dose_g_m2=0.0)
    with pytest.raises(InputError):
        D.calibrate_patch("NaCl", lwc_pct=5.0, dose_g_m2=50.0, fit="albedo")


def test_latin_hypercube_strata_and_seed():
    u = D.latin_hypercube(50, 2, seed=3)
    assert u.shape == (2, 50)
    for row in u:
        assert sorted(np.floor(row * 50).astype(int)) == list(range(50))
    np.testing.assert_array_equal(u, D.latin_hypercube(50, 2, seed=3))
    assert not np.array_equal(u, D.latin_hypercube(50, 2, seed=4))


def test_sample_lwc_inside_class_bounds():
    u = np.linspace(0.01, 0.99, 9)
    s = D.sample_lwc_pct([5.5, 5.5, 2.0], ["wet", "wet", "moist"], [True, False, True], u)
    assert s.shape == (3, 9)
    assert np.all((s[0] >= 3) & (s[0] <= 8)) and np.all(s[1] == 5.5) and np.all((s[2] >= 0) & (s[2] <= 3))


_theta = st.floats(1.0, 14.0)
_rho = st.floats(400.0, 700.0)
_e = st.floats(0.0, 5e6)


@settings(max_examples=40, deadline=None)
@given(_theta, st.floats(0.01, 5.0), _rho, _e)
def test_more_free_water_never_lowers_dose(theta, extra, rho, e):
    a = D.cold_balance("NaCl", theta, rho, e, with_passes=False).product_g_m2
    b = D.cold_balance("NaCl", min(theta + extra, 15.0), rho, e, with_passes=False).product_g_m2
    assert b >= a


@settings(max_examples=40, deadline=None)
@given(_theta, _rho, _e, st.floats(0.0, 2e6))
def test_more_sun_never_lowers_dose(theta, rho, e, add):
    # more shortwave on the slope raises every step's energy, hence E_in (see test_energy), hence the dose
    a = D.cold_balance("NH4NO3", theta, rho, e, with_passes=False).product_g_m2
    b = D.cold_balance("NH4NO3", theta, rho, e + add, with_passes=False).product_g_m2
    assert b >= a


@settings(max_examples=40, deadline=None)
@given(_theta, _rho, _e, st.floats(0.005, 0.2), st.floats(0.0, 0.2))
def test_deeper_layer_never_lowers_dose(theta, rho, e, d, extra):
    a = D.cold_balance("urea", theta, rho, e, depth_m=d, with_passes=False).product_g_m2
    b = D.cold_balance("urea", theta, rho, e, depth_m=d + extra, with_passes=False).product_g_m2
    assert b >= a


@settings(max_examples=25, deadline=None)
@given(st.lists(st.tuples(_theta, _rho, _e), min_size=1, max_size=6))
def test_vectorised_equals_scalar(rows):
    th, rh, ee = (np.array(c) for c in zip(*rows, strict=True))
    vec = D.cold_balance("NaCl", th, rh, ee)
    for k, (t, r, e) in enumerate(rows):
        one = D.cold_balance("NaCl", t, r, e)
        for f in ("water_to_remove_kg_m2", "salt_kg_m2", "product_g_m2", "max_salt_per_pass_kg_m2",
                  "passes", "pass_temp_c"):
            a, b = np.asarray(getattr(vec, f))[k], getattr(one, f)
            assert (np.isnan(a) and np.isnan(b)) or a == pytest.approx(b, rel=1e-12), f
