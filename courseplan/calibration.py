"""What a plan says about its calibration: the ``[calibration]`` table read back (no files, no physics).

``courseplan calibrate`` writes the fit of a test patch into the plan file's ``[calibration]`` table
(docs/calibration.md).  Every output of a plan should say whether the knobs it doses with were fitted,
where and when, and whether that fit fits this plan:

- :func:`calibration_notes` — "calibrated on <date> at <place> (k_f …)" or "not calibrated", plus a
  flag when the patch was on another day (more than :data:`MAX_DAYS_APART` days from the race), with
  another agent or on snow of another wetness class than the plan's;
- :func:`calibrated_refreeze_share` — the k_f a plan should dose with: the interval's middle, or the
  ``[dosing]`` setting clipped to a one-sided bound.

Only numbers and names from the table count: the free-text ``[dosing] calibrated`` note never makes a
plan "calibrated" and silences nothing.
"""

from __future__ import annotations

import datetime as _dt
from collections.abc import Iterable

from courseplan.settings import PlanSettings

__all__ = ["MAX_DAYS_APART", "calibrated_refreeze_share", "calibration_notes", "is_calibrated"]

MAX_DAYS_APART = 3
"""A patch more than this many days from the race day is flagged (the snow has changed) [practice]."""


def is_calibrated(settings: PlanSettings) -> bool:
    """True when ``[calibration]`` holds a fitted k_f with its kind and date."""
    c = settings.calibration
    return c.refreeze_share is not None and c.refreeze_share_kind is not None and c.date is not None


def calibrated_refreeze_share(settings: PlanSettings) -> tuple[float, str]:
    """The k_f to dose with, and where it came from.

    An interval gives its middle.  A one-sided fit keeps the ``[dosing] refreeze_share`` setting
    inside the bound: an upper bound (every rung held) caps it, a lower bound (every rung soft)
    raises it to the bound.  Without a calibration the setting stands.
    """
    ds, c = settings.dosing, settings.calibration
    if not is_calibrated(settings):
        return float(ds.refreeze_share), "setting"
    if c.refreeze_share_kind == "interval":
        return float(c.refreeze_share), f"test patch of {c.date}"
    if c.refreeze_share_kind == "upper bound":
        v = min(float(ds.refreeze_share), float(c.refreeze_share))
        return v, f"setting capped by the test patch of {c.date} (k_f ≤ {float(c.refreeze_share):.2f})"
    v = max(float(ds.refreeze_share), float(c.refreeze_share))
    return v, f"setting raised by the test patch of {c.date} (k_f ≥ {float(c.refreeze_share):.2f})"


def _place(c) -> str:
    if c.lon is None or c.lat is None:
        return "an unrecorded place"
    ns, ew = ("N" if c.lat >= 0 else "S"), ("E" if c.lon >= 0 else "W")
    return f"{abs(c.lat):.5f} {ns} {abs(c.lon):.5f} {ew}"


def _kf_text(c) -> str:
    k = float(c.refreeze_share)
    if c.refreeze_share_kind == "interval":
        lo, hi = float(c.refreeze_share_low or 0.0), float(c.refreeze_share_high or 1.0)
        return f"k_f {k:.2f}, interval {lo:.2f}–{hi:.2f}"
    return f"k_f {'≤' if c.refreeze_share_kind == 'upper bound' else '≥'} {k:.2f}, {c.refreeze_share_kind}"


def _same_agent(a: str, b: str) -> bool:
    def norm(x: str) -> str:
        return "".join(ch for ch in str(x).lower() if ch.isalnum())
    return norm(a) == norm(b)


def calibration_notes(settings: PlanSettings, wetness: Iterable[str] | None = None) -> list[str]:
    """Lines for every output: whether the plan is calibrated, and what does not match the plan.

    Parameters
    ----------
    settings
        Plan settings (``[calibration]``, ``[plan] date`` and ``agent``, ``[snow] classes``).
    wetness
        Wetness classes of the plan's zones (e.g. the zones' ``wetness`` column); default the classes
        of the ``[snow] classes`` defaults.

    Returns
    -------
    list of str
        First "calibrated on …" or "not calibrated …", then one line per mismatch.
    """
    c, ds = settings.calibration, settings.dosing
    if not is_calibrated(settings):
        return [f"not calibrated: k_f {ds.refreeze_share:.2f} with τ {ds.tau_min:.0f} min and T_b "
                f"{ds.brine_exit_temp_c:.1f} °C are settings; treat a test patch and run courseplan calibrate "
                "(docs/calibration.md)"]
    kf, src = calibrated_refreeze_share(settings)
    what = f"{c.agent} on {c.wetness} snow" if c.agent and c.wetness else (c.agent or "")
    out = [f"calibrated on {c.date} at {_place(c)} ({_kf_text(c)}{'; ' + what if what else ''}); "
           f"the plan doses with k_f {kf:.2f} ({src})"]
    pl = settings.plan
    if pl.date is not None:
        days = abs((_dt.date.fromisoformat(pl.date) - _dt.date.fromisoformat(c.date)).days)
        if days > MAX_DAYS_APART:
            out.append(f"calibration from another day: the patch was {days} days from the race "
                       f"({c.date} against {pl.date}); the snow has changed since, treat a new patch")
    if c.agent and not _same_agent(c.agent, pl.agent):
        out.append(f"calibration with another agent: the patch had {c.agent}, the plan spreads {pl.agent}; "
                   "k_f does not carry over, treat a patch with the plan's agent")
    classes = sorted({str(w) for w in (wetness if wetness is not None else
                                       (v.get("wetness") for v in settings.snow.classes.values()))
                      if w and str(w) not in ("nan", "None")})
    other = [w for w in classes if w != c.wetness]
    if c.wetness and other:
        out.append(f"calibration on other snow: the patch was {c.wetness}, the plan's snow is also "
                   f"{', '.join(other)}; k_f may differ there")
    kept = [(n, a, b) for n, a, b in (("τ", c.tau_min, ds.tau_min), ("T_b", c.brine_exit_temp_c,
                                                                     ds.brine_exit_temp_c))
            if a is not None and abs(float(a) - float(b)) > 1e-9]
    if kept:
        out.append("the plan's " + " and ".join(f"{n} {b:g}" for n, _, b in kept) + " differ from the fit's ("
                   + ", ".join(f"{n} {a:g}" for n, a, _ in kept) + "): k_f was fitted with those; calibrate again")
    return out
