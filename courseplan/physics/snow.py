"""Liquid-water-content (wetness) classes of snow on the ground, written once.

The International Classification for Seasonal Snow on the Ground [1]_ (after Colbeck et al. 1990)
names five wetness classes by volume fraction of liquid water θ: dry 0, moist 0–3, wet 3–8, very
wet 8–15 and soaked > 15 % vol.  The conditions stage, the dosing stage, the map and the
observations reader all use this table.

References
----------
.. [1] Fierz, C. et al. (2009). *The International Classification for Seasonal Snow on the Ground*.
   IHP-VII Technical Documents in Hydrology 83, UNESCO-IHP, Paris.
"""

from __future__ import annotations

WETNESS_CLASSES: dict[str, tuple[float, float]] = {
    "dry": (0.0, 0.0),
    "moist": (0.0, 3.0),
    "wet": (3.0, 8.0),
    "very-wet": (8.0, 15.0),
    "soaked": (15.0, 25.0),
}
"""Liquid water content bounds per wetness class [% vol], Fierz et al. (2009) [published]; the
upper bound of 'soaked' (open-ended in the classification) is a sampling assumption [practice]."""

WETNESS_NAMES: tuple[str, ...] = tuple(WETNESS_CLASSES)
"""The class names, driest first."""


def class_lwc_pct(wetness: str) -> float:
    """Representative liquid water content of a wetness class: the middle of its range [% vol]."""
    lo, hi = WETNESS_CLASSES[wetness]
    return 0.5 * (lo + hi)


def wetness_of(lwc_pct: float) -> str:
    """Wetness class (Fierz et al. 2009) of a liquid water content [% vol] (upper bounds inclusive)."""
    if lwc_pct <= 0:
        return "dry"
    for name in ("moist", "wet", "very-wet"):
        if lwc_pct <= WETNESS_CLASSES[name][1]:
            return name
    return "soaked"


def class_range_text(wetness: str) -> str:
    """The class range as printed in provenance lines, e.g. ``"3–8"`` [% vol]."""
    lo, hi = WETNESS_CLASSES[wetness]
    return f"{lo:g}" if lo == hi else f"{lo:g}–{hi:g}"
