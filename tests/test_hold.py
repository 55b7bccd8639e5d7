"""Harden and hold (courseplan.physics.hold): one pass per zone, its hold, and the keep-hard comparison.

Sources named per test: the design note ``dosing-model.md`` ("What the tests must show"), the field
evidence ``field-evidence.md`` (sections 1a, 2, 4), IAPWS R10-06 for c_ice and L_f, Fierz et al. (2009)
for the wetness classes, or "hand computation" (the arithmetic is in the comment).
"""

import math

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from courseplan.physics import hold as H
from courseplan.physics.dose import max_salt_per_pass_kg_m2

# Typed in from the sources, not taken from the code under test
L_F = 333.4e3  # J/kg, IAPWS R10-06 (333.43 kJ/kg)
RHO_W = 999.84  # kg/m³, IAPWS-95 at 0 °C
C_ICE_MEAN_2 = 2096.7 - 7.35  # J/(kg K), mean of c_ice over [−2, 0] °C: IAPWS-06 2.0967 kJ at 0 °C, slope
# 7.35 J/(kg K²) from the IAPWS values 2.097 (0 °C) and 2.023 kJ/(kg K) (−10 °C); mean = c0 + slope·T/2
R_NACL_M2 = 29.1  # kg water per kg NaCl at T_b = −2 °C, field-evidence.md §4.3 table row "−2.0 °C"
PURITY = 0.95  # catalogue NaCl purity (rock salt about 95 %)
DAY = 3600.0 * 10


def series(flux, dt=3600.0, steps=10):
    f = np.asarray(flux, dtype=float)
    return H.EnergySeries(np.broadcast_to(f[..., None], f.shape + (steps,)) if f.ndim == 0 or
                          f.shape[-1] != steps else f, dt)


def reserve_by_hand(theta_pct, rho, d=0.04, kf=0.5, tb=-2.0):
    th = theta_pct / 100.0
    return L_F * kf * RHO_W * th * d + C_ICE_MEAN_2 * (rho - RHO_W * th) * d * abs(tb)


# ---- hand computations -----------------------------------------------------------------------------
def test_components_by_hand():
    # hand computation, θ 5 %, d 0.04 m, k_f 0.5, ρ 550 kg/m³, T_b −2 °C:
    #   X_h = 0.5 · 999.84 · 0.05 · 0.04 = 0.99984 kg/m²
    #   I_d = (550 − 999.84·0.05) · 0.04 = 500.008 · 0.04 = 20.0003 kg/m²
    #   X_c = 2089.35 · 20.0003 · 2 / 333400 = 0.25068 kg/m²
    #   300 W/m² for τ = 20 min: E = 300 · 1200 = 360 000 J/m² = 0.36 MJ/m²
    p = H.pass_dose("NaCl", series(300.0), 0.0, 5.0, 550.0, tau_s=1200.0)
    assert p.x_h == pytest.approx(0.99984, rel=1e-9)
    assert p.x_c == pytest.approx(0.25068, rel=1e-4)
    assert p.e_k == pytest.approx(0.36e6, rel=1e-12)
    # s = (0.99984 + 0.25068 + 0.36e6/333400) / 29.1 = 2.33036 / 29.1 = 0.08008 kg/m²; D = s/0.95 = 84.3 g/m²
    assert p.salt == pytest.approx(2.33036 / R_NACL_M2, rel=0.01)
    assert p.product_g_m2 == pytest.approx(2.33036 / R_NACL_M2 / PURITY * 1000.0, rel=0.01)
    # R = 333400 · 0.99984 + 2089.35 · 20.0003 · 2 = 333 347 + 83 575 = 416 922 J/m²
    assert p.reserve == pytest.approx(416922.0, rel=1e-5)
    assert p.hard_from_s == 1200.0
    assert p.sub_passes == 1 and not p.slush_risk and not p.water_first


def test_free_water_term_matches_field_evidence_4_5():
    # field-evidence.md §4.5: with d 0.04, k_f 0.5, T_b −2 °C the free-water term alone gives
    # θ 2.5 % → 17, θ 5 % → 34, θ 8 % → 55 g/m² of salt.  In shade the salt is (X_h + X_c)/r,
    # so the free-water share of it is salt · X_h/(X_h + X_c).
    for theta, grams in ((2.5, 17.0), (5.0, 34.0), (8.0, 55.0)):
        p = H.pass_dose("NaCl", series(0.0), 0.0, theta, 550.0)
        assert 1000.0 * p.salt * p.x_h / (p.x_h + p.x_c) == pytest.approx(grams, abs=0.7)


def test_tiny_tau_is_free_water_plus_skeleton_only():
    # design "tiny τ → dose is the free-water + skeleton term only": (0.99984 + 0.25068)/29.1/0.95
    p = H.pass_dose("NaCl", series(1000.0), 3600.0, 5.0, 550.0, tau_s=1e-6)
    assert p.e_k <= 1000.0 * 1e-6 + 1e-9
    assert p.product_g_m2 == pytest.approx(1.25052 / R_NACL_M2 / PURITY * 1000.0, rel=0.01)


@settings(max_examples=60, deadline=None)
@given(st.lists(st.floats(-300.0, 0.0), min_size=1, max_size=12), st.floats(0.0, 1.0),
       st.floats(2.0, 12.0), st.floats(450.0, 650.0))
def test_shade_has_no_sun_term(fluxes, frac, theta, rho):
    # design "shade → no sun term": with zero or negative flux E_k = 0 and the dose is the τ → 0 dose
    s = H.EnergySeries(np.array(fluxes), 600.0)
    t = frac * s.end_s
    p = H.pass_dose("NaCl", s, t, theta, rho)
    q = H.pass_dose("NaCl", s, t, theta, rho, tau_s=0.0)
    assert p.e_k == 0.0
    assert p.salt == pytest.approx(q.salt, rel=1e-12)


def test_peak_not_end_of_window():
    # hand computation: 400 W/m² for 10 min then −400 W/m²: over τ = 20 min from 0 the cumulative energy
    # peaks at 600 s with 240 kJ/m² and ends at 0; E_k is the peak
    s = H.EnergySeries(np.array([400.0, -400.0, 0.0]), 600.0)
    assert H.sun_while_acting_j_m2(s, 0.0, 1200.0) == pytest.approx(240e3)


def test_partial_steps_are_interpolated():
    # hand computation, dt 600 s, flux 100/200/300 W/m²: C(300) = 30 kJ, C(1500) = 60 + 120 + 90 = 270 kJ,
    # so E over [300, 1500] = 240 kJ/m²; C(900) = 60 + 200·300/1000 = 120 kJ/m²
    s = H.EnergySeries(np.array([100.0, 200.0, 300.0]), 600.0)
    assert H.sun_while_acting_j_m2(s, 300.0, 1200.0) == pytest.approx(240e3)
    assert H.cumulative_energy_j_m2(s, 900.0) == pytest.approx(120e3)


def test_hold_end_between_grid_points():
    # hand computation: hourly grid, 100 W/m² in the first hour, 500 W/m² after.  Pass at 0, τ 20 min:
    # hard from 1200 s; 1200–3600 s brings 240 000 J/m², the rest of R (416 922 − 240 000 = 176 922)
    # comes at 500 W/m² in 353.8 s, so the hold ends at 3953.8 s, inside the second step
    s = H.EnergySeries(np.array([100.0] + [500.0] * 9), 3600.0)
    end = H.hold_end_s(s, 0.0, 5.0, 550.0, tau_s=1200.0)
    assert end == pytest.approx(3600.0 + (reserve_by_hand(5.0, 550.0) - 240e3) / 500.0, rel=1e-9)
    assert end == pytest.approx(3953.8, abs=0.2)


@settings(max_examples=60, deadline=None)
@given(st.floats(50.0, 1000.0), st.floats(1.0, 15.0), st.floats(400.0, 700.0), st.floats(0.01, 0.08),
       st.floats(0.0, 7200.0))
def test_hold_under_constant_flux_is_reserve_over_flux(flux, theta, rho, d, t_k):
    # hand computation: under a constant flux F the hold lasts R/F after hard_from, R by hand (IAPWS c, L)
    p = H.pass_dose("NaCl", series(flux, dt=1800.0, steps=48), t_k, theta, rho, depth_m=d)
    r = reserve_by_hand(theta, rho, d)
    assert p.reserve == pytest.approx(r, rel=1e-6)
    assert p.hard_until_s - p.hard_from_s == pytest.approx(r / flux, rel=1e-6)


@settings(max_examples=80, deadline=None)
@given(st.lists(st.floats(-150.0, 600.0), min_size=2, max_size=16), st.floats(0.0, 0.9),
       st.floats(0.0, 30.0))
def test_no_jump_by_a_step(fluxes, frac, shift):
    # piecewise-linear C: moving the spread time by δ moves C and E_k by at most max|F|·δ (twice for E_k)
    s = H.EnergySeries(np.array(fluxes), 900.0)
    t = frac * s.end_s
    fmax = max(abs(f) for f in fluxes)
    dc = abs(H.cumulative_energy_j_m2(s, t + shift) - H.cumulative_energy_j_m2(s, t))
    de = abs(H.sun_while_acting_j_m2(s, t + shift) - H.sun_while_acting_j_m2(s, t))
    assert dc <= fmax * shift * (1 + 1e-9) + 1e-6
    assert de <= 2 * fmax * shift * (1 + 1e-9) + 1e-6


# ---- hold properties (design: "the hold time grows with the reserve and shrinks with the sun") ------
flux_lists = st.lists(st.floats(-150.0, 800.0), min_size=4, max_size=16)


@settings(max_examples=80, deadline=None)
@given(flux_lists, st.floats(1.0, 12.0), st.floats(0.0, 5.0), st.floats(0.02, 0.06), st.floats(0.0, 0.02))
def test_hold_grows_with_reserve(fluxes, theta, dtheta, d, dd):
    s = H.EnergySeries(np.array(fluxes), 1800.0)
    base = H.hold_end_s(s, 0.0, theta, 550.0, depth_m=d)
    assert H.hold_end_s(s, 0.0, theta + dtheta, 550.0, depth_m=d) >= base
    assert H.hold_end_s(s, 0.0, theta, 550.0, depth_m=d + dd) >= base


@settings(max_examples=80, deadline=None)
@given(flux_lists, st.lists(st.floats(0.0, 400.0), min_size=16, max_size=16), st.floats(1.0, 12.0))
def test_hold_shrinks_with_stronger_sun(fluxes, extra, theta):
    f = np.array(fluxes)
    s = H.EnergySeries(f, 1800.0)
    sunnier = H.EnergySeries(f + np.array(extra[:len(f)]), 1800.0)
    assert H.hold_end_s(sunnier, 0.0, theta, 550.0) <= H.hold_end_s(s, 0.0, theta, 550.0)


def test_hold_to_end_of_day_and_out_of_domain():
    s = series(-50.0)
    assert H.hold_end_s(s, 0.0, 5.0, 550.0) == math.inf  # night/shade: never re-supplies R on the grid
    assert H.first_gain_time_s(s, 100.0, 0.0) == 100.0  # nothing to spend: ends when it starts
    assert math.isnan(H.sun_while_acting_j_m2(s, -1.0, 1200.0))  # before the grid origin
    assert math.isnan(H.pass_dose("NaCl", s, 2 * DAY, 5.0, 550.0).salt)  # after the grid end
    assert math.isnan(H.pass_dose("NaCl", s, 0.0, -1.0, 550.0).salt)  # negative θ
    assert math.isnan(H.pass_dose("NaCl", s, 0.0, 5.0, 550.0, brine_exit_temp_c=0.0).salt)
    bad = H.EnergySeries(np.array([100.0, np.nan, 100.0]), 3600.0)
    assert math.isnan(H.hold_end_s(bad, 0.0, 5.0, 550.0))


def test_broadcasts_over_zones_and_samples():
    # flux per zone (Z, 1, T), θ per zone and sample (Z, S), spread time per zone (Z, 1)
    flux = np.array([0.0, 200.0, 400.0])[:, None, None] * np.ones((3, 1, 8))
    theta = np.array([[3.0, 5.0, 8.0, 12.0]] * 3)
    p = H.pass_dose("NaCl", H.EnergySeries(flux, 1800.0), np.array([[0.0], [600.0], [1200.0]]), theta, 550.0)
    assert np.shape(p.product_g_m2) == (3, 4) and np.shape(p.sub_passes) == (3, 4)
    for z in range(3):
        for k in range(4):
            q = H.pass_dose("NaCl", H.EnergySeries(flux[z, 0], 1800.0), 600.0 * z, theta[z, k], 550.0)
            assert p.product_g_m2[z, k] == pytest.approx(q.product_g_m2, rel=1e-12)
            assert p.hard_until_s[z, k] == pytest.approx(q.hard_until_s, rel=1e-12)


# ---- the field band -------------------------------------------------------------------------------
@settings(max_examples=150, deadline=None)
@given(st.lists(st.floats(-100.0, 400.0), min_size=10, max_size=10), st.floats(0.0, 0.95),
       st.floats(2.5, 8.0), st.floats(450.0, 650.0))
def test_pass_lies_in_field_band(fluxes, frac, theta, rho):
    # field-evidence.md: net fluxes −100 (clear-sky longwave, §4.1) to +400 W/m² (peak S 30° net ≈ 365,
    # §4.1); θ 2.5–8 % (§0 item 4, §4.5); dense race snow 450–650 kg/m³ (§4.2, machine snow 523 kg/m³).
    # One treatment derived from table 1a rows A1 (7–21), A2 (12–35), A5 (~10–30) g/m² and §4.4
    # (10–100 g/m²); §0 item 2: nothing supports more than 150 g/m² in one pass.  Band: 5–150 g/m².
    s = H.EnergySeries(np.array(fluxes), 3600.0)
    p = H.pass_dose("NaCl", s, frac * s.end_s, theta, rho)
    assert 5.0 <= p.product_g_m2 <= 150.0
    assert p.sub_passes == 1 and not p.slush_risk and not p.water_first


@settings(max_examples=40, deadline=None)
@given(st.floats(-100.0, 80.0), st.floats(4.5, 5.5))
def test_closed_layer_temperature_of_a_field_band_pass(flux, theta):
    # design "the closed-layer temperature of a pass matches T_b within the stated tolerance" (2 K):
    # a 30–60 g/m² NaCl pass in 4 cm at θ ≈ 5 %, ρ 550 kg/m³ (field band, field-evidence table 1a)
    p = H.pass_dose("NaCl", series(flux), 0.0, theta, 550.0, with_layer_temp=True)
    assert 30.0 <= p.product_g_m2 <= 60.0
    assert p.layer_temp_c < 0.0
    assert abs(p.layer_temp_c - (-2.0)) == pytest.approx(p.temp_mismatch)
    assert p.temp_mismatch <= 2.0 and not p.temp_flag


def test_closed_layer_check_flags_a_dose_that_does_not_fit_its_layer():
    # dosing-model.md: "510 g/m² ... closed-layer temperature of that dose in 4 cm is −9.3 °C, not −2 °C".
    # 800 W/m² for τ = 2 h on wet snow gives a pass of that size; the check must flag it.
    p = H.pass_dose("NaCl", series(800.0), 0.0, 5.0, 550.0, tau_s=7200.0, with_layer_temp=True)
    assert p.product_g_m2 > 400.0 and p.sub_passes > 1
    assert p.layer_temp_c < -6.0 and p.temp_flag
    assert math.isnan(H.pass_dose("NaCl", series(800.0), 0.0, 5.0, 550.0).layer_temp_c)  # off by default


# ---- verdicts on physics ---------------------------------------------------------------------------
def test_water_first_only_where_the_sun_does_not_wet_the_snow():
    # hand computation: θ 0.2 %, 300 W/m² for τ 20 min melts 0.36e6/333400 = 1.0798 kg/m², in 4 cm
    # Δθ = 100 · 0.36e6 / (333400 · 999.84 · 0.04) = 2.700 %, so θ_eff = 2.90 % ≥ θ_min 1 %: treat
    sunny = H.pass_dose("NaCl", series(300.0), 0.0, 0.2, 550.0)
    assert not sunny.water_first and sunny.theta_eff == pytest.approx(2.90, abs=0.005)
    assert sunny.product_g_m2 > 0
    shade = H.pass_dose("NaCl", series(0.0), 0.0, 0.2, 550.0)
    assert shade.water_first and shade.product_g_m2 == 0.0 and shade.sub_passes == 0
    assert math.isnan(shade.hard_until_s)


def test_no_cliff_at_theta_min():
    # design: "no cliff where the dose jumps from 0 to hundreds of g/m² at θ = 1 %".  Sweep θ 0–3 % in
    # 0.001 % steps at 100 W/m²: the dose changes smoothly, and the one step at the water-first boundary
    # is at most (ρ_w θ_min d + X_c)/r/purity = (0.39994 + 0.27)/29.1/0.95 ≈ 24 g/m² (hand computation)
    theta = np.arange(0.0, 3.0, 0.001)
    p = H.pass_dose("NaCl", series(100.0), 0.0, theta, 550.0)
    jumps = np.abs(np.diff(p.product_g_m2))
    boundary = np.diff(p.water_first.astype(int)) != 0
    assert boundary.sum() == 1
    assert np.max(jumps[~boundary]) < 0.1
    assert np.max(jumps[boundary]) < 25.0


def test_slush_risk_is_a_verdict_on_dry_snow():
    # field-evidence.md §2 "over-dose and wrong snow": too much salt on too-dry snow makes slush (X1,
    # Adelboden A1).  A pass needing several sub-passes below the wet class (3 %, Fierz et al. 2009) is
    # capped at the slush limit and flagged; wet snow (4 %) keeps its sub-passes uncapped.
    s = series(800.0)
    dry = H.pass_dose("NaCl", s, 0.0, 2.0, 550.0, tau_s=7200.0)
    smax = max_salt_per_pass_kg_m2("NaCl", dry.theta_eff, 550.0, 0.01, 0.10)
    assert dry.slush_risk and dry.sub_passes == 1
    assert dry.salt == pytest.approx(smax, rel=1e-9)
    assert dry.product_uncapped_g_m2 > 2 * dry.product_g_m2
    wet = H.pass_dose("NaCl", s, 0.0, 4.0, 550.0, tau_s=7200.0)
    assert not wet.slush_risk and wet.sub_passes == math.ceil(wet.salt / wet.max_salt_per_pass - 1e-9) > 1
    assert wet.product_g_m2 == wet.product_uncapped_g_m2


# ---- keep hard -------------------------------------------------------------------------------------
def test_keep_hard_by_hand():
    # hand computation, constant 300 W/m², θ 5 %, ρ 550: each pass is hard from t+τ to t+τ+R/F, so the
    # passes come every P = 1200 + 416 922/300 = 2589.7 s; over 4 h: ⌈14 400/2589.7⌉ = 6 passes of
    # 2.33036/29.1/0.95 = 84.3 g/m² each, about 506 g/m²
    k = H.keep_hard("NaCl", series(300.0), 5.0, 550.0, 0.0, 4 * 3600.0)
    period = 1200.0 + reserve_by_hand(5.0, 550.0) / 300.0
    assert k.passes == math.ceil(4 * 3600.0 / period) == 6
    assert k.product_g_m2 == pytest.approx(6 * 2.33036 / R_NACL_M2 / PURITY * 1000.0, rel=0.01)
    assert k.held_until_s == pytest.approx(6 * period, rel=1e-9)
    assert not k.truncated


@settings(max_examples=40, deadline=None)
@given(st.lists(st.floats(-100.0, 700.0), min_size=20, max_size=20), st.floats(1800.0, 5 * 3600.0),
       st.floats(2.0, 10.0))
def test_doubling_the_window_adds_passes_never_a_bigger_pass(fluxes, window, theta):
    # design: "doubling the window adds passes, never a bigger single pass".  Every pass is bounded by
    # what τ of the strongest sun can bring (hand bound), whatever the window.
    s = H.EnergySeries(np.array(fluxes), 1800.0)
    one = H.keep_hard("NaCl", s, theta, 550.0, 0.0, window)
    two = H.keep_hard("NaCl", s, theta, 550.0, 0.0, 2 * window)
    assert two.passes >= one.passes >= 1
    assert two.product_g_m2 >= one.product_g_m2 - 1e-9
    first = H.pass_dose("NaCl", s, 0.0, theta, 550.0)
    bound = (first.x_h + first.x_c + 1200.0 * max(max(fluxes), 0.0) / L_F) / (R_NACL_M2 * 0.99) / PURITY * 1e3
    assert one.max_pass_g_m2 <= bound and two.max_pass_g_m2 <= bound
    assert one.max_pass_g_m2 >= first.product_g_m2 and two.max_pass_g_m2 >= first.product_g_m2


def test_keep_hard_vectorised_over_zones():
    flux = np.array([0.0, 150.0, 400.0])[:, None] * np.ones((3, 12))
    k = H.keep_hard("NaCl", H.EnergySeries(flux, 1800.0), np.array([5.0, 5.0, 5.0]), 550.0, 0.0, 4 * 3600.0)
    assert k.passes[0] == 1 and k.held_until_s[0] == math.inf  # shade holds all day after one pass
    assert k.passes[2] > k.passes[1] > k.passes[0]
    for z in range(3):
        kz = H.keep_hard("NaCl", H.EnergySeries(flux[z], 1800.0), 5.0, 550.0, 0.0, 4 * 3600.0)
        assert kz.passes == k.passes[z] and kz.product_g_m2 == pytest.approx(k.product_g_m2[z], rel=1e-12)
