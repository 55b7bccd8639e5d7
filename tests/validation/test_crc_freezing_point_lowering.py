"""Freezing curves vs the CRC table "Freezing point lowering by electrolytes in aqueous solution".

Source: CRC Handbook of Chemistry and Physics, "Freezing point lowering by electrolytes in aqueous
solution", after Forsythe, W. E., *Smithsonian Physical Tables*, 9th ed. (1956): lowering of the
freezing point [K] by molality [mol/kg] [published].  Rows are typed in here from the table.

- NaCl: an independent check (the catalogue curve comes from the mass-% table of another CRC section).
- KCl, NH4Cl, KNO3: the catalogue curves are built from these rows, so these checks confirm the
  typing, the molality → mass-fraction conversion and the interpolation (±0.05 K).
- CaCl2: the catalogue follows Melinder (2010); the Smithsonian rows are known to lie 0.2–0.9 K
  colder.  The test records that gap (it must stay below 1 K).
"""

import pytest

from courseplan.agents import get_agent
from courseplan.physics.brine import freezing_point

MOLALITY = (0.05, 0.10, 0.25, 0.50, 0.75, 1.00, 1.50, 2.00, 2.50, 3.00)
ROWS = {
    "KCl": (0.17, 0.35, 0.86, 1.68, 2.49, 3.29, 4.88, 6.50, 8.14, 9.77),
    "KNO3": (0.17, 0.33, 0.78, 1.47, 2.11, 2.66),
    "NH4Cl": (0.17, 0.34, 0.85, 1.70, 2.55),
    "NaCl": (0.18, 0.35, 0.85, 1.68, 2.60),
    "CaCl2": (0.25, 0.49, 1.27, 2.66, 4.28, 6.35, 10.78, 15.27, 20.42, 28.08),
}


def _w(agent, b):
    mb = b * get_agent(agent).molar_mass_g_mol / 1000.0
    return mb / (1.0 + mb)


def _cases(names, tol):
    for name in names:
        for b, dt in zip(MOLALITY, ROWS[name], strict=False):
            yield pytest.param(name, b, dt, tol, id=f"{name}-{b}")


@pytest.mark.parametrize("agent, b, dt, tol", list(_cases(["KCl", "KNO3", "NH4Cl"], 0.05)))
def test_rows_reproduced(agent, b, dt, tol):
    assert freezing_point(agent, _w(agent, b)) == pytest.approx(-dt, abs=tol)


@pytest.mark.parametrize("agent, b, dt, tol", list(_cases(["NaCl"], 0.1)))
def test_nacl_independent_table(agent, b, dt, tol):
    # the 0.05 mol/kg row (0.18 K) is below the mass-% table's first row: dilute limit
    assert freezing_point(agent, _w(agent, b)) == pytest.approx(-dt, abs=tol)


@pytest.mark.parametrize("agent, b, dt, tol", list(_cases(["CaCl2"], 1.0)))
def test_cacl2_known_gap_to_smithsonian_rows(agent, b, dt, tol):
    t = freezing_point(agent, _w(agent, b))
    assert t == pytest.approx(-dt, abs=tol)
