"""Terrain geometry for sun and shade: slope, aspect, incidence, cast shadows.

Pure numpy functions on elevation grids; no files, no printing.  Angles are degrees, lengths metres;
azimuths and aspects are measured clockwise from grid north (0 = north, 90 = east), as in pvlib.

References
----------
.. [1] Duffie, J. A. & Beckman, W. A. (2013). *Solar Engineering of Thermal Processes*, 4th ed.,
   Wiley, Eq. (1.6.3). doi:10.1002/9781118671603
.. [2] Horn, B. K. P. (1981). Hill shading and the reflectance map. *Proceedings of the IEEE* 69(1),
   14–47. doi:10.1109/PROC.1981.11918

Grids are north-up: row 0 is the northern edge, column 0 the western edge, cells ``dx`` by ``dy``
metres.  Cast shadows are found by a sweep along the sun's azimuth that carries, for every ray of light,
the height of the shadow surface cast by the terrain already passed (a *shadow-height front*); see
:class:`ShadowCaster`.
"""

from __future__ import annotations

import math

import numpy as np

from courseplan.errors import InputError

__all__ = ["ShadowCaster", "cast_shadow", "cos_incidence", "horn_gradient", "normal_from_gradient",
           "slope_aspect_from_gradient", "slope_aspect_horn", "sun_vector", "surface_normal"]


def sun_vector(zenith_deg, azimuth_deg):
    """Return the unit vector towards the sun in (east, north, up) components.

    Parameters
    ----------
    zenith_deg
        Solar zenith angle [deg].
    azimuth_deg
        Solar azimuth [deg], clockwise from north.

    Returns
    -------
    tuple of numpy.ndarray
        ``(east, north, up)`` [-]: ``(sin Z sin A, sin Z cos A, cos Z)``.
    """
    z = np.radians(zenith_deg)
    a = np.radians(azimuth_deg)
    return np.sin(z) * np.sin(a), np.sin(z) * np.cos(a), np.cos(z)


def surface_normal(slope_deg, aspect_deg, dtype=np.float64):
    """Upward unit normal of a sloping surface in (east, north, up) components.

    Parameters
    ----------
    slope_deg
        Surface slope [deg].
    aspect_deg
        Direction the slope faces (downhill) [deg], clockwise from north.
    dtype
        Floating type of the returned arrays (``numpy.float32`` for large grids).

    Returns
    -------
    tuple of numpy.ndarray
        ``(east, north, up)`` [-]: ``(sin β sin γ, sin β cos γ, cos β)``.  NaN inputs give NaN.
    """
    b = np.radians(np.asarray(slope_deg, dtype=dtype))
    g = np.radians(np.asarray(aspect_deg, dtype=dtype))
    sb = np.sin(b)
    return (sb * np.sin(g)).astype(dtype, copy=False), (sb * np.cos(g)).astype(dtype, copy=False), \
        np.cos(b).astype(dtype, copy=False)


def cos_incidence(zenith_deg, azimuth_deg, slope_deg, aspect_deg):
    """Cosine of the angle of incidence of the direct beam on a sloping surface.

    Parameters
    ----------
    zenith_deg
        Solar zenith angle [deg] (scalar or array).
    azimuth_deg
        Solar azimuth [deg], clockwise from north.
    slope_deg
        Surface slope (tilt from horizontal) [deg].
    aspect_deg
        Direction the slope faces (downhill) [deg], clockwise from north.

    Returns
    -------
    numpy.ndarray or float
        ``cos θ`` [-], *not* clipped: a negative value means the sun is behind the slope (self-shaded).
        Broadcasts its inputs with numpy rules.

    Notes
    -----
    ``cos θ = cos Z cos β + sin Z sin β cos(A − γ)``, Eq. (1.6.3) of [1]_ (the difference of the two
    azimuths does not depend on where azimuth is counted from).  It equals the dot product of
    :func:`sun_vector` and :func:`surface_normal`, which is how large grids evaluate it (the normal is
    computed once per grid, then three multiply-adds per sun position).
    """
    z = np.radians(zenith_deg)
    b = np.radians(slope_deg)
    d = np.radians(np.asarray(azimuth_deg) - np.asarray(aspect_deg))
    return np.cos(z) * np.cos(b) + np.sin(z) * np.sin(b) * np.cos(d)  # Eq. (1.6.3) of [1]


def horn_gradient(dem, dx_m: float, dy_m: float, dtype=np.float32):
    """Elevation gradient of a north-up grid by Horn's 3 × 3 finite differences [2]_.

    Parameters
    ----------
    dem
        Elevation [m], 2-D, row 0 at the north; NaN marks nodata.
    dx_m, dy_m
        Cell width (west–east) and height (south–north) [m], both positive: the *real* cell size in a
        metric CRS.
    dtype
        Floating type of the results (float32 keeps large grids lean).

    Returns
    -------
    dzdx, dzdy : numpy.ndarray
        ``∂z/∂x`` towards grid east and ``∂z/∂y`` towards grid north [m/m]; NaN where ``dem`` is NaN.

    Notes
    -----
    With the neighbourhood ``a b c / d e f / g h i`` (``a`` north-west)::

        ∂z/∂x = ((c + 2f + i) − (a + 2d + g)) / (8 dx)
        ∂z/∂y = ((a + 2b + c) − (g + 2h + i)) / (8 dy)

    (Horn's weighted estimator [2]_, the one GDAL's ``gdaldem slope`` uses by default.)  At the grid's
    outer edge the missing row or column is extrapolated linearly (exact for planes); a nodata
    neighbour is replaced by the centre cell, so a cell next to nodata keeps a one-sided estimate.
    """
    z = np.asarray(dem)
    if z.ndim != 2 or min(z.shape) < 2:
        raise InputError(f"elevation grid of shape {z.shape} is too small", where="DEM",
                         fix="give a 2-D DEM of at least 2 × 2 cells")
    if not (dx_m > 0 and dy_m > 0):
        raise InputError(f"cell size {dx_m} × {dy_m} m is not positive", where="DEM",
                         fix="give a DEM in a metric, north-up CRS")
    z = z.astype(dtype, copy=False)
    pad = np.pad(z, 1, mode="reflect", reflect_type="odd")  # 2·edge − inner: linear extrapolation
    n, m = z.shape
    nodata = np.isnan(z)
    any_nan = bool(nodata.any())

    def nb(di: int, dj: int) -> np.ndarray:
        v = pad[1 + di:1 + di + n, 1 + dj:1 + dj + m]
        return np.where(np.isnan(v), z, v) if any_nan else v

    a, b, c = nb(-1, -1), nb(-1, 0), nb(-1, 1)
    g, h, i = nb(1, -1), nb(1, 0), nb(1, 1)
    gy = a + 2 * b + c
    gy -= g
    gy -= 2 * h
    gy -= i
    gy /= dtype(8.0 * dy_m)                              # ∂z/∂y (north), Horn [2]_
    d, f = nb(0, -1), nb(0, 1)
    gx = c + 2 * f + i
    gx -= a
    gx -= 2 * d
    gx -= g
    gx /= dtype(8.0 * dx_m)                              # ∂z/∂x (east), Horn [2]_
    if any_nan:
        gx[nodata] = np.nan
        gy[nodata] = np.nan
    return gx, gy


def slope_aspect_from_gradient(dzdx, dzdy):
    """Slope and aspect from an elevation gradient.

    Parameters
    ----------
    dzdx, dzdy
        ``∂z/∂x`` (east) and ``∂z/∂y`` (north) [m/m].

    Returns
    -------
    slope_deg, aspect_deg : numpy.ndarray
        Slope ``atan |∇z|`` [deg] and aspect, the azimuth of the downhill direction ``−∇z`` [deg],
        clockwise from grid north in [0, 360); aspect is 0 where the slope is exactly 0.
    """
    gx, gy = np.asarray(dzdx), np.asarray(dzdy)
    slope = np.degrees(np.arctan(np.hypot(gx, gy)))
    aspect = np.degrees(np.arctan2(-gx, -gy))
    aspect %= aspect.dtype.type(360.0)
    aspect[(gx == 0) & (gy == 0)] = 0
    return slope, aspect


def slope_aspect_horn(dem, dx_m: float, dy_m: float, dtype=np.float32):
    """Slope and aspect of a north-up elevation grid by Horn's method [2]_.

    Parameters
    ----------
    dem
        Elevation [m], 2-D, row 0 at the north; NaN marks nodata.
    dx_m, dy_m
        Cell width and height [m] (real cell size in a metric CRS).
    dtype
        Floating type of the results.

    Returns
    -------
    slope_deg, aspect_deg : numpy.ndarray
        See :func:`horn_gradient` and :func:`slope_aspect_from_gradient`; NaN where ``dem`` is NaN.
    """
    return slope_aspect_from_gradient(*horn_gradient(dem, dx_m, dy_m, dtype=dtype))


def normal_from_gradient(dzdx, dzdy):
    """Upward unit normal ``(−∂z/∂x, −∂z/∂y, 1) / √(1 + |∇z|²)`` in (east, north, up) components.

    Parameters
    ----------
    dzdx, dzdy
        ``∂z/∂x`` (east) and ``∂z/∂y`` (north) [m/m].

    Returns
    -------
    tuple of numpy.ndarray
        ``(east, north, up)`` [-], equal to :func:`surface_normal` of the slope and aspect from
        :func:`slope_aspect_from_gradient`, without the trigonometric round trip.
    """
    gx, gy = np.asarray(dzdx), np.asarray(dzdy)
    up = 1.0 / np.sqrt(1.0 + gx * gx + gy * gy)
    return -gx * up, -gy * up, up


class ShadowCaster:
    """Cast shadows of a terrain model for any sun position, by a sweep along the sun's azimuth.

    Parameters
    ----------
    dem
        Elevation [m], 2-D, north-up; NaN = nodata (neither casts nor receives a shadow).
    dx_m, dy_m
        Cell width and height [m].

    Notes
    -----
    The grid is swept line by line away from the sun, along whichever grid axis lies closer to the
    sun's azimuth (light enters through one edge and leaves through the opposite one).  Every cell
    belongs to exactly one discrete ray of light: in sweep line ``i`` the ray ``k`` sits at lateral
    index ``k + round(i·s)``, where ``s`` is the ray's lateral drift per line: a discrete ray stays
    within half a cell of a straight line in the sun's direction (so a shadow lies within one cell of
    the true line through the cell casting it) and nothing is blurred by interpolation.
    For each ray the sweep carries the height ``H`` of the shadow surface cast by the terrain
    already passed: moving one line down-sun, ``H ← H − Δ·tan(e)`` (``Δ`` the horizontal distance
    per line along the ray, ``e`` the sun's elevation); the cell is in shadow when ``H > z``; then
    ``H ← max(H, z)``.  This is exactly the condition "some cell up-sun rises above the line of
    sight to the sun", so all terrain inside the grid casts shadows, not only the course.

    Each line is one vectorised numpy step on a contiguous slice of the front (no per-cell Python
    loop), so the cost is O(cells) per sun position with two float32 buffers.  Terrain outside the
    grid, the curvature of the earth (about 8 m of drop over 10 km) and atmospheric refraction of
    the line of sight to distant ridges are not included.  A one-cell-thin diagonal wall can leak
    light between the 8-connected discrete rays.
    """

    def __init__(self, dem, dx_m: float, dy_m: float):
        z = np.asarray(dem, dtype=np.float32)
        if z.ndim != 2 or min(z.shape) < 1:
            raise InputError(f"elevation grid of shape {z.shape} cannot cast shadows", where="DEM",
                             fix="give a 2-D DEM")
        if not (dx_m > 0 and dy_m > 0):
            raise InputError(f"cell size {dx_m} × {dy_m} m is not positive", where="DEM",
                             fix="give a DEM in a metric, north-up CRS")
        self.z = np.ascontiguousarray(z)
        self.dx_m = float(dx_m)
        self.dy_m = float(dy_m)
        self._zt: np.ndarray | None = None   # contiguous transpose, made on first east/west sun

    @property
    def shape(self) -> tuple[int, int]:
        """Grid shape (rows, columns)."""
        return self.z.shape

    def shadow(self, azimuth_deg: float, elevation_deg: float, out: np.ndarray | None = None) -> np.ndarray:
        """Cells in the cast shadow of the terrain for one sun position.

        Parameters
        ----------
        azimuth_deg
            Sun azimuth [deg], clockwise from *grid* north.
        elevation_deg
            Apparent sun elevation [deg]; at or below 0 every cell is in shadow.
        out
            Optional boolean array of the grid's shape to write into.

        Returns
        -------
        numpy.ndarray of bool
            True where the terrain up-sun hides the sun's centre; False on nodata cells.
        """
        n_rows, n_cols = self.z.shape
        if out is None:
            out = np.empty((n_rows, n_cols), dtype=bool)
        elif out.shape != self.z.shape or out.dtype != bool:
            raise ValueError("out must be a boolean array of the grid's shape")
        if not (elevation_deg > 0):
            out[...] = True
            out[np.isnan(self.z)] = False
            return out
        tan_e = math.tan(math.radians(elevation_deg))
        az = math.radians(azimuth_deg)
        sin_a, cos_a = math.sin(az), math.cos(az)
        # Light travels towards azimuth az + 180°: d(col)/dm = −sin A (east), d(row)/dm = +cos A (south).
        if abs(cos_a) >= abs(sin_a):                      # sweep row by row
            z, o = self.z, out
            step_m, lat_m, p, q = self.dy_m, self.dx_m, abs(cos_a), -sin_a
            if cos_a < 0:                                 # sun in the south: light goes north
                z, o = z[::-1], o[::-1]
            self._sweep(z, o, drift=step_m * q / p / lat_m, drop=step_m / p * tan_e)
        else:                                             # sweep column by column on the transpose
            if self._zt is None:
                self._zt = np.ascontiguousarray(self.z.T)
            z = self._zt
            ot = np.empty(z.shape, dtype=bool)
            step_m, lat_m, p, q = self.dx_m, self.dy_m, abs(sin_a), cos_a
            if sin_a > 0:                                 # sun in the east: light goes west
                z, o = z[::-1], ot[::-1]
            else:
                o = ot
            self._sweep(z, o, drift=step_m * q / p / lat_m, drop=step_m / p * tan_e)
            out[...] = ot.T
        return out

    @staticmethod
    def _sweep(z: np.ndarray, out: np.ndarray, drift: float, drop: float) -> None:
        """Propagate the shadow-height front along increasing first index of ``z`` (see class notes)."""
        n_lines, n_lat = z.shape
        offsets = np.rint(np.arange(n_lines) * drift).astype(np.int64)
        lo, hi = int(offsets.min()), int(offsets.max())
        front = np.full(n_lat + hi - lo, -np.inf, dtype=np.float32)  # one entry per ray
        drop32 = np.float32(drop)
        for i in range(n_lines):
            start = hi - int(offsets[i])
            h = front[start:start + n_lat]                # rays crossing line i, in lateral order
            h -= drop32                                   # H ← H − Δ tan e
            np.greater(h, z[i], out=out[i])               # in shadow where H > z
            np.fmax(h, z[i], out=h)                       # H ← max(H, z); NaN (nodata) is transparent


def cast_shadow(dem, dx_m: float, dy_m: float, azimuth_deg: float, elevation_deg: float) -> np.ndarray:
    """Cast-shadow mask of a terrain model for one sun position (see :class:`ShadowCaster`).

    Parameters
    ----------
    dem
        Elevation [m], 2-D, north-up; NaN = nodata.
    dx_m, dy_m
        Cell width and height [m].
    azimuth_deg
        Sun azimuth [deg], clockwise from grid north.
    elevation_deg
        Apparent sun elevation [deg].

    Returns
    -------
    numpy.ndarray of bool
        True where the cell is in the shadow of terrain up-sun (or the sun is down).
    """
    return ShadowCaster(dem, dx_m, dy_m).shadow(azimuth_deg, elevation_deg)
