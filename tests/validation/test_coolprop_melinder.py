"""Freezing curves vs CoolProp's Melinder (2010) ice-liquidus fits (general-purpose library).

Source: Melinder, Å. (2010), *Properties of secondary working fluids for indirect systems*, IIR, as
fitted in CoolProp (``INCOMP::MNA`` NaCl, ``MCA`` CaCl2, ``MMG`` MgCl2) [library].  Compared only
below the eutectic composition (the fits run on past it into impossible values).  CoolProp is a
test-only dependency.  The CaCl2 and MgCl2 catalogue rows were typed from these fits every 1–2 %,
so the checks at the intermediate points test the interpolation between rows (±0.3 K); NaCl is
an independent check of the CRC rows (±0.15 K: tables differ by up to 0.08 K, plus the fit).
"""

import numpy as np
import pytest

CP = pytest.importorskip("CoolProp.CoolProp")

from courseplan.physics.brine import freezing_point  # noqa: E402


def melinder_c(fluid, w):
    return CP.PropsSI("T_freeze", "T", 273.15, "P", 101325, f"INCOMP::{fluid}[{w}]") - 273.15


CASES = [
    ("CaCl2", "MCA", np.round(np.arange(0.01, 0.2951, 0.005), 4), 0.3),
    ("MgCl2", "MMG", np.round(np.arange(0.01, 0.2101, 0.005), 4), 0.3),
    # NaCl up to 22 %: from 21 % on the curve follows the CRC/Lange handbook rows, which the fit runs
    # about 0.15 K warm of at 23 % (tests/validation/test_nacl_near_eutectic.py checks those rows)
    ("NaCl", "MNA", np.round(np.arange(0.01, 0.2201, 0.01), 4), 0.15),
]


@pytest.mark.parametrize("agent, fluid, ws, tol", CASES, ids=[c[0] for c in CASES])
def test_below_eutectic_within_tolerance(agent, fluid, ws, tol):
    ref = np.array([melinder_c(fluid, float(w)) for w in ws])
    ours = np.asarray(freezing_point(agent, ws))
    worst = np.max(np.abs(ours - ref))
    assert worst <= tol, f"worst difference {worst:.3f} K at w={ws[np.argmax(np.abs(ours - ref))]}"


def test_documented_point():
    # domain-data §4: PropsSI(..., 'INCOMP::MNA[0.10]') → 266.60 K
    assert melinder_c("MNA", 0.10) + 273.15 == pytest.approx(266.60, abs=0.01)
    assert freezing_point("NaCl", 0.10) == pytest.approx(266.60 - 273.15, abs=0.1)
