"""Coordinate reference systems: one metric test, one UTM helper, one "must be metric" check.

Every layer that needs to know whether a CRS measures in metres, or which UTM zone holds a point,
calls these (pyproj).  Pure: CRS objects in, CRS objects or booleans out.
"""

from __future__ import annotations

from pyproj import CRS

from courseplan.errors import CRSError

METRE_UNITS = frozenset({"metre", "meter", "m"})


def is_metric(crs) -> bool:
    """Whether *crs* is projected with metre axes (the first two axes; a vertical axis is ignored)."""
    if crs is None:
        return False
    c = CRS.from_user_input(crs)
    if not c.is_projected:
        return False
    return {ax.unit_name.lower() for ax in c.axis_info[:2]} <= METRE_UNITS


def utm_crs(lon: float, lat: float) -> CRS:
    """The WGS 84 UTM zone CRS containing a point (EPSG 326xx north, 327xx south).

    Parameters
    ----------
    lon, lat
        Point [deg].
    """
    zone = int((lon + 180.0) // 6.0) % 60 + 1
    return CRS.from_epsg((32600 if lat >= 0 else 32700) + zone)


def require_metric(crs, what: str, fix: str) -> CRS:
    """Return *crs* as a :class:`pyproj.CRS`, or raise :class:`CRSError` when it is missing or not metric."""
    if crs is None:
        raise CRSError(f"the {what} has no CRS", where=what, fix=fix)
    try:
        c = CRS.from_user_input(crs)
    except Exception as exc:  # pyproj raises its own CRSError type
        raise CRSError(f"cannot read the {what}'s CRS ({exc})", where=what, fix="give an EPSG code or WKT") from None
    if not is_metric(c):
        raise CRSError(f"the {what}'s CRS {c.name!r} is not projected in metres", where=what, fix=fix)
    return c
