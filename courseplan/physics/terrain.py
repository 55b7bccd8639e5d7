"""Terrain geometry for sun and shade: slope, aspect, incidence, cast shadows.

Pure numpy functions on elevation grids; no files, no printing.  Angles are degrees, lengths metres;
azimuths and aspects are measured clockwise from grid north (0 = north, 90 = east), as in pvlib.

References
----------
.. [1] Duffie, J. A. & Beckman, W. A. (2013). *Solar Engineering of Thermal Processes*, 4th ed.,
   Wiley, Eq. (1.6.3). doi:10.1002/9781118671603
"""

from __future__ import annotations

import numpy as np

__all__ = ["cos_incidence", "sun_vector", "surface_normal"]


def sun_vector(zenith_deg, azimuth_deg):
    """Unit vector towards the sun in (east, north, up) components.

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
