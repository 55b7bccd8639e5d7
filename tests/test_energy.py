"""Part B: point energy balance of a 0 °C snow surface (hand-computed values)."""

import math

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from courseplan.physics import energy as E


def test_kasten_czeplak_cloud_factor():
    # 1 − 0.75 N^3.4: clear 1, overcast 0.25, half 1 − 0.75·0.5^3.4 = 0.92894
    assert E.cloud_shortwave_factor(0.0) == 1.0
    assert E.cloud_shortwave_factor(1.0) == pytest.approx(0.25)
    assert E.cloud_shortwave_factor(0.5) == pytest.approx(1 - 0.75 * 0.5**3.4)


def test_brutsaert_emissivity_by_hand():
    # T_a = 0 °C, e_a = 611.2 Pa → 1.24 (6.112/273.15)^(1/7) = 0.7207
    assert E.clear_sky_emissivity(0.0, 611.2) == pytest.approx(1.24 * (6.112 / 273.15) ** (1 / 7), rel=1e-12)
    assert E.clear_sky_emissivity(0.0, 611.2) == pytest.approx(0.7207, abs=5e-4)


def test_incoming_longwave_cloud_raises_and_caps():
    clear = E.incoming_longwave_w_m2(5.0, 700.0, 0.0)
    cloudy = E.incoming_longwave_w_m2(5.0, 700.0, 1.0)
    assert cloudy > clear
    assert cloudy <= 5.670374419e-8 * 278.15**4 + 1e-9


def test_sensible_heat_by_hand():
    # ρ = 85000 / (287.05 · 278.15) = 1.06460; H = ρ·1005·1.5e-3·2·5 = 16.049 W/m²
    rho = 85000 / (287.05 * 278.15)
    assert E.sensible_heat_w_m2(5.0, 2.0, 85000.0) == pytest.approx(rho * 1005 * 1.5e-3 * 2 * 5, rel=1e-9)
    assert E.sensible_heat_w_m2(0.0, 5.0) == 0.0


def test_latent_heat_sign_follows_611_pa():
    # e_a = 611.15 Pa (the 0 °C surface) → no latent flux; wetter air condenses (+), drier evaporates (−)
    t = 2.0
    rh_eq = 611.15 / E.saturation_vapour_pressure_pa(t) * 100
    assert E.latent_heat_w_m2(t, rh_eq, 3.0) == pytest.approx(0.0, abs=1e-9)
    assert E.latent_heat_w_m2(t, 95.0, 3.0) > 0 > E.latent_heat_w_m2(t, 40.0, 3.0)


def test_net_flux_sums_its_parts():
    args = (5.0, 70.0, 2.0, 0.3)
    ea = E.vapour_pressure_pa(5.0, 70.0)
    parts = (0.4 * 500.0 * E.cloud_shortwave_factor(0.3) + E.incoming_longwave_w_m2(5.0, ea, 0.3)
             - 315.657 + E.sensible_heat_w_m2(5.0, 2.0) + E.latent_heat_w_m2(5.0, 70.0, 2.0))  # σ·273.15⁴
    assert E.net_flux_w_m2(500.0, *args, albedo=0.6) == pytest.approx(parts, abs=0.01)


def test_energy_income_peak_of_cumulative():
    assert E.energy_income_j_m2([1.0, -2.0, 3.0]) == 2.0
    assert E.energy_income_j_m2([3.0, -2.0, 0.5]) == 3.0
    assert E.energy_income_j_m2([-1.0, -1.0]) == 0.0
    np.testing.assert_array_equal(E.energy_income_j_m2(np.array([[1.0, 1.0], [-1.0, 5.0]])), [2.0, 4.0])


@settings(max_examples=60, deadline=None)
@given(st.lists(st.floats(-1e6, 1e6), min_size=1, max_size=12), st.floats(-1e6, 1e6))
def test_longer_window_never_lowers_income(steps, extra):
    assert E.energy_income_j_m2(steps + [extra]) >= E.energy_income_j_m2(steps)


@settings(max_examples=60, deadline=None)
@given(st.lists(st.floats(-1e6, 1e6), min_size=1, max_size=12), st.floats(0, 1e6), st.integers(0, 11))
def test_more_energy_in_a_step_never_lowers_income(steps, add, k):
    k = k % len(steps)
    more = list(steps)
    more[k] += add
    assert E.energy_income_j_m2(more) >= E.energy_income_j_m2(steps)


def test_hock_temperature_index():
    # (MF + a·I)·T·Δt = (1.8 + 0.0008·500)·4·2 = 17.6 mm; none below 0 °C
    assert E.hock_melt_kg_m2(4.0, 2.0, 500.0) == pytest.approx(17.6)
    assert E.hock_melt_kg_m2(-3.0, 2.0, 500.0) == 0.0


def test_vapour_pressure_known_values():
    # saturation over water at 10 °C: 1228.1 Pa; over ice at −10 °C: 259.87 Pa (IAPWS) [library]
    assert E.saturation_vapour_pressure_pa(10.0) == pytest.approx(1228.1, abs=0.5)
    assert E.saturation_vapour_pressure_pa(-10.0, over="ice") == pytest.approx(259.87, abs=0.1)
    with pytest.raises(ValueError):
        E.saturation_vapour_pressure_pa(0.0, over="glass")
    assert math.isfinite(E.vapour_pressure_pa(3.0, 50.0))
