"""NaCl freezing curve near the eutectic vs the tabulated handbook rows (not the CoolProp polynomial).

Sources, typed in here (not imported from the catalogue):

- CRC Handbook of Chemistry and Physics, 102nd ed. (2021), "Concentrative properties of aqueous
  solutions", sodium chloride, freezing-point depression column: 21 % 17.78, 22 % 19.18, 23 % 20.67 K
  [published];
- Lange's Handbook of Chemistry, 15th ed., Table 5.13 "Freezing point of sodium chloride brines"
  (compiled with the International Salt Co.): 21 % −17.78, 22 % −19.19, 23 % −20.69, 23.3 % (eutectic)
  −21.1 °C [published].

The two handbooks agree within 0.02 K.  CoolProp's Melinder (2010) fit (``INCOMP::MNA``) runs warm
here (about 0.15 K at 23 %), so the curve must be colder than it at 23 %.
"""

import pytest

from courseplan import freezing_point

CRC_ROWS = [(21, -17.78), (22, -19.18), (23, -20.67)]
LANGE_ROWS = [(21, -17.78), (22, -19.19), (23, -20.69), (23.3, -21.1)]


@pytest.mark.parametrize("pct, t_ref", CRC_ROWS)
def test_crc_rows_21_to_23_percent(pct, t_ref):
    assert freezing_point("NaCl", pct / 100.0) == pytest.approx(t_ref, abs=0.02)


@pytest.mark.parametrize("pct, t_ref", LANGE_ROWS)
def test_lange_rows_and_eutectic(pct, t_ref):
    # 0.05 K: the handbooks differ by up to 0.02 K and the eutectic row is given to 0.1 K
    assert freezing_point("NaCl", pct / 100.0) == pytest.approx(t_ref, abs=0.05)


def test_colder_than_coolprop_at_23_percent():
    cp = pytest.importorskip("CoolProp.CoolProp")
    t_cp = cp.PropsSI("T_freeze", "T", 273.15, "P", 101325, "INCOMP::MNA[0.23]") - 273.15
    ours = freezing_point("NaCl", 0.23)
    assert ours < t_cp - 0.1
    assert t_cp == pytest.approx(-20.515, abs=0.01)  # the value the catalogue used before (CoolProp 8.0)


def test_monotone_through_the_new_rows():
    ws = [0.20, 0.205, 0.21, 0.215, 0.22, 0.225, 0.23, 0.2331]
    ts = [freezing_point("NaCl", w) for w in ws]
    assert all(b < a for a, b in zip(ts, ts[1:], strict=False))
