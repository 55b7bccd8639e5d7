"""Every agent's eutectic vs its published value, and the curve ends there.

Sources (design notes, domain-data.md §3; each beside its value below).  Tolerances follow the
rounding of the published value ("≈ −50 °C" → ±0.5 K; values given to 0.1 K → ±0.05 K).
Values tagged [memory] in the catalogue (NH4NO3, KNO3) are checked only for the curve's end, not
against a published number.
"""

import math

import pytest

from courseplan.agents import get_agent
from courseplan.physics.brine import freezing_point, liquidus_mass_fraction

PUBLISHED = [
    # agent, T_eut °C, w_eut, tol T, tol w, source
    ("NaCl", -21.12, 0.2331, 0.01, 0.0001, "Salt Institute property page (-21.12 °C, 23.31 %)"),
    ("urea", -11.5, 0.325, 0.05, 0.0005, "ISO 22241: the 32.5 % urea solution is the eutectic"),
    ("CaCl2", -50.0, 0.305, 0.5, 0.005, "phasediagram.dk CaCl2-H2O: ≈ -50 °C, ≈ 30-31 %"),
    ("CaCl2.2H2O", -50.0, 0.305, 0.5, 0.005, "same brine as anhydrous CaCl2"),
    ("MgCl2", -33.2, 0.216, 0.05, 0.0005, "J. Chinese Inst. Chem. Eng. 33(5) 2002, 469-475"),
    ("KCl", -10.8, 0.199, 0.05, 0.0005, "Brady 2009 H2O-KCl phase diagram"),
    ("(NH4)2SO4", -19.35, 0.40, 0.005, 0.005, "J. Phys. Chem. B 102(38), 7462-7469 (1998)"),
    ("NH4Cl", -15.4, 0.197, 0.05, 0.0005, "encyclopedic cryohydrate table (secondary)"),
]


@pytest.mark.parametrize("agent, t_e, w_e, tol_t, tol_w, source", PUBLISHED, ids=[p[0] for p in PUBLISHED])
def test_catalogue_eutectic_is_published_value(agent, t_e, w_e, tol_t, tol_w, source):
    ag = get_agent(agent)
    assert ag.eutectic_c == pytest.approx(t_e, abs=tol_t), source
    assert ag.eutectic_mass_fraction == pytest.approx(w_e, abs=tol_w), source


@pytest.mark.parametrize("agent", ["NaCl", "NH4NO3", "urea", "CaCl2", "CaCl2.2H2O", "MgCl2", "KCl",
                                   "(NH4)2SO4", "NH4Cl", "KNO3"])
def test_curve_ends_at_the_eutectic(agent):
    ag = get_agent(agent)
    assert freezing_point(ag, ag.eutectic_mass_fraction) == pytest.approx(ag.eutectic_c, abs=1e-9)
    assert liquidus_mass_fraction(ag, ag.eutectic_c) == pytest.approx(ag.eutectic_mass_fraction, abs=1e-9)
    assert math.isnan(freezing_point(ag, ag.eutectic_mass_fraction * 1.01))  # no ice liquidus past it
    assert math.isnan(liquidus_mass_fraction(ag, ag.eutectic_c - 0.5))
