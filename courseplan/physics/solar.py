"""Solar position and clear-sky irradiance over a time window, and irradiation on slopes.

Thin, explicit wrappers around pvlib [L]: solar position by the NREL Solar Position Algorithm [1]_
(``pvlib.solarposition.spa_python``), clear-sky irradiance by Ineichen & Perez [2]_
(``pvlib.clearsky.ineichen``) with the monthly Linke turbidity climatology that ships with pvlib
(``pvlib.clearsky.lookup_linke_turbidity``, file ``LinkeTurbidities.h5``), and transposition onto
sloping surfaces: beam by the cosine of incidence (:func:`courseplan.physics.terrain.cos_incidence`),
sky diffuse by the isotropic sky-view factor ``(1 + cos β) / 2`` of Liu & Jordan [3]_.

The window is split into ``n = ceil((end − start) / step)`` equal steps; solar position and irradiance
are evaluated at each step's mid-point and held for the step (midpoint rule), so window totals are
``Σ G_i · Δt`` [Wh/m²].

No files are opened here other than pvlib's own shipped data; no printing.

References
----------
.. [1] Reda, I. & Andreas, A. (2004). Solar position algorithm for solar radiation applications.
   *Solar Energy* 76(5), 577–589. doi:10.1016/j.solener.2003.12.003
.. [2] Ineichen, P. & Perez, R. (2002). A new airmass independent formulation for the Linke turbidity
   coefficient. *Solar Energy* 73(3), 151–157. doi:10.1016/S0038-092X(02)00045-2
.. [3] Liu, B. Y. H. & Jordan, R. C. (1963). The long-term average performance of flat-plate
   solar-energy collectors. *Solar Energy* 7(2), 53–74. doi:10.1016/0038-092X(63)90006-9
"""

from __future__ import annotations

import math
import warnings
from dataclasses import dataclass, field

import numpy as np
import pandas as pd

from courseplan.errors import SettingsError
from courseplan.physics.terrain import sun_vector, surface_normal

__all__ = ["ClearSkyWindow", "clear_sky_window", "irradiation_on_slope_wh_m2", "window_times"]


@dataclass(frozen=True, eq=False)
class ClearSkyWindow:
    """Sun positions and clear-sky irradiance at the mid-points of the steps of a time window.

    Attributes
    ----------
    times
        Step mid-points, tz-aware :class:`pandas.DatetimeIndex`.
    zenith_deg
        Apparent (refraction-corrected) topocentric solar zenith [deg], NREL SPA [1]_.
    azimuth_deg
        Solar azimuth [deg], clockwise from north.
    ghi_w_m2, dni_w_m2, dhi_w_m2
        Clear-sky global horizontal, direct normal and diffuse horizontal irradiance [W/m²],
        Ineichen–Perez [2]_; zero with the sun below the horizon.
    step_hours
        Length of every step [h].
    linke_turbidity
        Linke turbidity used at each step [-] (pvlib climatology).
    latitude, longitude, altitude_m
        Site [deg, deg, m].
    start, end
        Window limits, tz-aware :class:`pandas.Timestamp`.
    """

    times: pd.DatetimeIndex
    zenith_deg: np.ndarray
    azimuth_deg: np.ndarray
    ghi_w_m2: np.ndarray
    dni_w_m2: np.ndarray
    dhi_w_m2: np.ndarray
    step_hours: float
    linke_turbidity: np.ndarray = field(repr=False)
    latitude: float = math.nan
    longitude: float = math.nan
    altitude_m: float = 0.0
    start: pd.Timestamp | None = None
    end: pd.Timestamp | None = None

    @property
    def n_steps(self) -> int:
        """Number of time steps [-]."""
        return len(self.times)

    @property
    def window_hours(self) -> float:
        """Length of the window [h]."""
        return self.n_steps * self.step_hours

    @property
    def elevation_deg(self) -> np.ndarray:
        """Apparent solar elevation ``90 − zenith`` [deg]."""
        return 90.0 - self.zenith_deg

    @property
    def sun_up(self) -> np.ndarray:
        """Boolean per step: the sun's centre is above the (sea-level, flat) horizon."""
        return self.zenith_deg < 90.0

    @property
    def ghi_wh_m2(self) -> float:
        """Window total of global horizontal irradiation [Wh/m²]."""
        return float(np.sum(self.ghi_w_m2) * self.step_hours)

    @property
    def dni_wh_m2(self) -> float:
        """Window total of direct normal irradiation [Wh/m²]."""
        return float(np.sum(self.dni_w_m2) * self.step_hours)

    @property
    def dhi_wh_m2(self) -> float:
        """Window total of diffuse horizontal irradiation [Wh/m²]."""
        return float(np.sum(self.dhi_w_m2) * self.step_hours)


def _parse_clock(date: str, clock: str, timezone: str, what: str) -> pd.Timestamp:
    try:
        naive = pd.Timestamp(f"{date} {clock}")
    except (ValueError, TypeError) as exc:
        raise SettingsError(f"cannot read {what} {date!r} {clock!r} ({exc})", where=what,
                            fix="give the date as YYYY-MM-DD and the time as HH:MM") from None
    if naive.tzinfo is not None:
        raise SettingsError(f"{what} {clock!r} carries its own offset", where=what,
                            fix="give a local clock time HH:MM and the time zone separately")
    try:
        return naive.tz_localize(timezone, nonexistent="raise", ambiguous="raise")
    except Exception as exc:  # unknown zone names raise several types, depending on the backend
        raise SettingsError(f"cannot place {date} {clock} in time zone {timezone!r} ({exc})",
                            where="timezone", fix="use an IANA zone name such as Europe/Zurich") from None


def window_times(date: str, start: str, end: str, timezone: str,
                 step_minutes: float = 15.0) -> tuple[pd.DatetimeIndex, float, pd.Timestamp, pd.Timestamp]:
    """Mid-points of the equal steps that split a local clock window.

    Parameters
    ----------
    date
        Day, ``YYYY-MM-DD``.
    start, end
        Local clock times ``HH:MM`` (or ``HH:MM:SS``); ``end`` after ``start`` on the same day.
    timezone
        IANA time zone name (e.g. ``Europe/Vienna``) or a fixed zone such as ``Etc/GMT+7`` (UTC−7).
    step_minutes
        Longest step [min]; the window is split into ``ceil(length / step_minutes)`` equal steps.

    Returns
    -------
    times, step_hours, t_start, t_end
        Mid-points (tz-aware), step length [h], window limits.

    Raises
    ------
    SettingsError
        Unreadable date/time/zone, ``end <= start``, or a non-positive step.
    """
    if not (step_minutes > 0 and math.isfinite(step_minutes)):
        raise SettingsError(f"step of {step_minutes} min is not a positive number", where="step_minutes",
                            fix="give a step such as 15")
    t0 = _parse_clock(date, start, timezone, "start")
    t1 = _parse_clock(date, end, timezone, "end")
    length_min = (t1 - t0).total_seconds() / 60.0
    if length_min <= 0:
        raise SettingsError(f"window end {end} is not after start {start}", where="end",
                            fix="give an end time later than the start on the same day")
    n = max(1, math.ceil(length_min / step_minutes - 1e-9))
    step = pd.Timedelta(minutes=length_min / n)
    times = pd.DatetimeIndex([t0 + step * (i + 0.5) for i in range(n)])
    return times, step.total_seconds() / 3600.0, t0, t1


def clear_sky_window(latitude, longitude, altitude_m, date: str, start: str, end: str, timezone: str,
                     step_minutes: float = 15.0, *, pressure_pa: float | None = None,
                     temperature_c: float = 12.0, delta_t_s: float | None = None,
                     linke_turbidity: float | None = None) -> ClearSkyWindow:
    """Solar position and clear-sky irradiance for a local time window.

    Parameters
    ----------
    latitude, longitude
        Site [deg] (north, east positive).
    altitude_m
        Site altitude [m] above sea level.
    date, start, end, timezone, step_minutes
        The window, see :func:`window_times`.
    pressure_pa
        Air pressure [Pa] for refraction; default from altitude (``pvlib.atmosphere.alt2pres``,
        standard atmosphere).
    temperature_c
        Air temperature [°C] for refraction (SPA default 12 °C).
    delta_t_s
        ΔT = TT − UT [s]; default: pvlib's estimate for the date.
    linke_turbidity
        Override the Linke turbidity [-]; default: pvlib's monthly climatology for the site.

    Returns
    -------
    ClearSkyWindow

    Notes
    -----
    Zenith is SPA's *apparent* topocentric zenith (with refraction), the quantity of the published
    test vector of [1]_ (zenith 50.11162° for 17 Oct 2003 12:30:30 UTC−7 at Golden, Colorado).
    Clear-sky irradiance is Ineichen–Perez [2]_ with absolute (pressure-corrected) Kasten–Young air
    mass and extraterrestrial normal irradiance for the day of year (pvlib defaults).
    """
    import pvlib  # heavy import kept local

    if not (-90.0 <= float(latitude) <= 90.0 and -180.0 <= float(longitude) <= 360.0):
        raise SettingsError(f"site latitude {latitude}, longitude {longitude} out of range",
                            where="site", fix="give geographic degrees (WGS 84)")
    times, step_hours, t0, t1 = window_times(date, start, end, timezone, step_minutes)
    pressure = float(pvlib.atmosphere.alt2pres(altitude_m)) if pressure_pa is None else float(pressure_pa)
    sp = pvlib.solarposition.spa_python(times, latitude, longitude, altitude=altitude_m, pressure=pressure,
                                        temperature=temperature_c, how="numpy",
                                        delta_t=None if delta_t_s is None else float(delta_t_s))
    zen = sp["apparent_zenith"].to_numpy(dtype=float)
    azi = sp["azimuth"].to_numpy(dtype=float)
    if linke_turbidity is None:
        with warnings.catch_warnings():  # pvlib 0.16 calls a pandas attribute that pandas 3 deprecates
            warnings.filterwarnings("ignore", message=".*dayofyear is deprecated.*")
            tl = pvlib.clearsky.lookup_linke_turbidity(times, latitude, longitude).to_numpy(dtype=float)
    else:
        tl = np.full(len(times), float(linke_turbidity))
    am_rel = pvlib.atmosphere.get_relative_airmass(zen)  # Kasten & Young 1989, NaN below horizon
    am_abs = pvlib.atmosphere.get_absolute_airmass(am_rel, pressure)
    doy_utc = times.tz_convert("UTC").day_of_year.to_numpy(dtype=float)
    dni_extra = np.asarray(pvlib.irradiance.get_extra_radiation(doy_utc), dtype=float)  # Spencer 1971
    with np.errstate(divide="ignore", invalid="ignore"):  # NaN air mass with the sun down
        cs = pvlib.clearsky.ineichen(zen, am_abs, tl, altitude=altitude_m, dni_extra=dni_extra)
    ghi, dni, dhi = (np.nan_to_num(np.asarray(cs[k], dtype=float), nan=0.0) for k in ("ghi", "dni", "dhi"))
    down = zen >= 90.0
    ghi[down] = dni[down] = dhi[down] = 0.0
    return ClearSkyWindow(times=times, zenith_deg=zen, azimuth_deg=azi, ghi_w_m2=ghi, dni_w_m2=dni,
                          dhi_w_m2=dhi, step_hours=step_hours, linke_turbidity=tl, latitude=float(latitude),
                          longitude=float(longitude), altitude_m=float(altitude_m), start=t0, end=t1)


def sky_view_isotropic(slope_deg):
    """Isotropic sky-view factor of a tilted plane, ``(1 + cos β) / 2`` [-], after Liu & Jordan [3]_.

    Parameters
    ----------
    slope_deg
        Surface slope [deg].

    Returns
    -------
    numpy.ndarray
        Share of the sky hemisphere's diffuse irradiance the plane receives [-].  Terrain that rises
        above the plane's own horizon is not accounted for.
    """
    return 0.5 * (1.0 + np.cos(np.radians(slope_deg)))


def irradiation_on_slope_wh_m2(cs: ClearSkyWindow, slope_deg, aspect_deg, sun_fraction=None):
    """Clear-sky irradiation on sloping surfaces over a window [Wh/m²] (beam + sky diffuse).

    Parameters
    ----------
    cs
        The window's sun positions and clear-sky irradiance (:func:`clear_sky_window`).
    slope_deg, aspect_deg
        Surface slope and the direction it faces [deg] (broadcastable arrays; NaN → NaN).
    sun_fraction
        Optional share of the window each surface spends in direct sun [-], counting cast shadows, the
        sun behind the slope and the sun below the horizon (band 1 of a sun raster).  When given, the
        unshaded beam is scaled by ``sun_fraction / f_open``, where ``f_open`` is the share of steps
        with the sun above the horizon and in front of the slope, so a cell never shaded by other
        terrain keeps its exact beam (and the scale is capped at 1).  Without it, no cast shadows.

    Returns
    -------
    numpy.ndarray
        ``Σ_i [DNI_i · max(cos θ_i, 0) · s + DHI_i · (1 + cos β)/2] · Δt`` [Wh/m²], where ``s`` is the
        beam scale above (1 without ``sun_fraction``); floating type follows the inputs (float32 stays
        float32).

    Notes
    -----
    Beam transposition: cosine of incidence, Eq. (1.6.3) of Duffie & Beckman (2013); diffuse:
    isotropic sky [3]_.  Ground-reflected irradiance and circumsolar brightening are left out
    (a conservative, lower estimate on snow).
    """
    slope = np.asarray(slope_deg)
    aspect = np.asarray(aspect_deg)
    dtype = np.result_type(slope.dtype, aspect.dtype, np.float32)
    ne, nn, nu = surface_normal(slope, aspect, dtype=dtype)
    shape = np.broadcast_shapes(ne.shape, nu.shape)
    beam = np.zeros(shape, dtype=dtype)
    open_steps = np.zeros(shape, dtype=dtype) if sun_fraction is not None else None
    cosi = np.empty(shape, dtype=dtype)
    for z, a, dni in zip(cs.zenith_deg, cs.azimuth_deg, cs.dni_w_m2, strict=True):
        if z >= 90.0:
            continue
        se, sn, su = (dtype.type(v) for v in sun_vector(z, a))
        np.multiply(ne, se, out=cosi)
        cosi += nn * sn
        cosi += nu * su
        np.maximum(cosi, 0, out=cosi)
        if open_steps is not None:
            open_steps += cosi > 0
        beam += dtype.type(dni) * cosi
    if sun_fraction is not None:
        frac = np.asarray(sun_fraction, dtype=dtype)
        f_open = open_steps / dtype.type(max(cs.n_steps, 1))
        with np.errstate(divide="ignore", invalid="ignore"):
            scale = np.where(f_open > 0, np.minimum(frac / f_open, 1), 0).astype(dtype, copy=False)
        beam *= scale
    diffuse = sky_view_isotropic(slope).astype(dtype, copy=False) * dtype.type(np.sum(cs.dhi_w_m2))
    return (beam + diffuse) * dtype.type(cs.step_hours)  # NaN slopes/aspects propagate to NaN
