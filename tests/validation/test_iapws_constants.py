"""Constants of water and ice vs IAPWS releases.

Sources: IAPWS R10-06 (2009) ice Ih (Feistel & Wagner 2006, J. Phys. Chem. Ref. Data 35, 1021);
IAPWS-95 (Wagner & Pruß 2002, J. Phys. Chem. Ref. Data 31, 387); IAPWS R14-08 (2011) melting and
sublimation pressures (Wagner et al. 2011, J. Phys. Chem. Ref. Data 40, 043103).  Reference values
as listed in the design notes (domain-data.md §5, computed with the `iapws` package [library]),
the triple point (defined values) and a check value of R14-08 (from memory, see below).
"""

import pytest

from courseplan import constants as C
from courseplan.physics.energy import outgoing_longwave_w_m2, saturation_vapour_pressure_pa


def test_latent_heat_of_fusion():
    # IAPWS-06 at 101.325 kPa: 333.4 kJ/kg (domain-data §5, via iapws) [library]
    assert C.L_FUSION == pytest.approx(333.4e3, abs=0.05e3)


def test_ice_density_and_heat_capacity():
    # IAPWS-06: ρ = 916.7 kg/m³, c_p = 2.097 kJ/(kg·K) at 0 °C [library]
    assert C.RHO_ICE == pytest.approx(916.7, abs=0.05)
    assert C.CP_ICE_0C == pytest.approx(2097.0, abs=0.5)
    # slope through 2.023 (−10 °C) and 1.950 (−20 °C) kJ/(kg·K)
    assert C.CP_ICE_0C - 10 * C.CP_ICE_SLOPE == pytest.approx(2023.0, abs=1.0)
    assert C.CP_ICE_0C - 20 * C.CP_ICE_SLOPE == pytest.approx(1950.0, abs=1.0)


def test_liquid_water_at_0c():
    # IAPWS-95 at 0 °C: 999.8 kg/m³, 4.219 kJ/(kg·K) [library]
    assert C.RHO_WATER == pytest.approx(999.8, abs=0.05)
    assert C.CP_WATER == pytest.approx(4219.0, abs=0.5)


def test_cryoscopic_constant_derived():
    # K_f = R T0² / L_f: textbook 1.86 K·kg/mol; domain-data §5 gives 1.860 [derived]
    assert C.K_CRYOSCOPIC == pytest.approx(1.860, abs=0.001)


def test_triple_point_pressure_both_equations():
    # defined value p_t = 611.657 Pa at T_t = 273.16 K (IAPWS)
    assert saturation_vapour_pressure_pa(0.01, over="water") == pytest.approx(611.657, rel=1e-5)
    assert saturation_vapour_pressure_pa(0.01, over="ice") == pytest.approx(611.657, rel=1e-9)


def test_normal_boiling_point():
    # IAPWS-95: normal boiling temperature 373.124 K at 101.325 kPa
    assert saturation_vapour_pressure_pa(373.124 - 273.15) == pytest.approx(101325.0, rel=1e-4)


def test_sublimation_check_value():
    # IAPWS R14-08 check value: p_subl(230 K) = 8.947 35 Pa (from memory; reproduced to 6 digits)
    assert saturation_vapour_pressure_pa(230.0 - 273.15, over="ice") == pytest.approx(8.94735, rel=1e-5)


def test_longwave_of_melting_surface():
    # domain-data §8: σ T0⁴ ≈ 315.6 W/m² with ε = 1 [derived]
    assert outgoing_longwave_w_m2(0.0) == pytest.approx(315.6, abs=0.1)
