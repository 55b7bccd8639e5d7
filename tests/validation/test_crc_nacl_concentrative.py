"""NaCl freezing curve vs the CRC Handbook table "Concentrative properties of aqueous solutions".

Source: CRC Handbook of Chemistry and Physics, "Concentrative properties of aqueous solutions: density,
refractive index, freezing point depression, and viscosity", sodium chloride, freezing-point
depression column (rows as listed in the design notes, domain-data.md §4) [published].
Tolerance 0.1 K: published NaCl tables differ by up to 0.08 K at 2–6 %.
"""

import numpy as np
import pytest

from courseplan import physics  # noqa: F401  (package import check)
from courseplan.physics.brine import freezing_point, liquidus_mass_fraction

# mass % → freezing point [°C], typed from the CRC table (NaCl), not imported from the catalogue
CRC_NACL = [
    (0.5, -0.30), (1, -0.59), (2, -1.19), (3, -1.79), (4, -2.41), (5, -3.05), (6, -3.70), (7, -4.38),
    (8, -5.08), (9, -5.81), (10, -6.56), (12, -8.18), (14, -9.94), (16, -11.89), (18, -14.04),
    (20, -16.46),
]


@pytest.mark.parametrize("pct, t_crc", CRC_NACL)
def test_freezing_point_matches_crc_rows(pct, t_crc):
    assert freezing_point("NaCl", pct / 100.0) == pytest.approx(t_crc, abs=0.1)


@pytest.mark.parametrize("pct, t_crc", CRC_NACL)
def test_liquidus_inverts_to_crc_rows(pct, t_crc):
    # the inverse at the tabulated temperature gives back the tabulated mass fraction (±0.05 %-points)
    assert liquidus_mass_fraction("NaCl", t_crc) == pytest.approx(pct / 100.0, abs=5e-4)


def test_worked_value_10_percent_is_not_ideal():
    # domain-data §4 worked value: ideal formula −7.07 °C, real solution −6.56 °C (CRC row)
    t = freezing_point("NaCl", 0.10)
    assert t == pytest.approx(-6.56, abs=0.1)
    assert abs(t - (-7.07)) > 0.4


def test_between_rows_is_between_neighbours():
    ws = np.array([0.25, 1.5, 11.0, 19.0]) / 100.0
    t = freezing_point("NaCl", ws)
    assert np.all(t < 0)
    assert -0.30 < t[0] < 0.0
    assert -1.19 < t[1] < -0.59
    assert -8.18 < t[2] < -6.56
    assert -16.46 < t[3] < -14.04
