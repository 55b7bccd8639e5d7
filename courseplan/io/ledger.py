"""The venue ledger: a CSV of what every written plan spread, zone by zone, over a season.

- :func:`plan_version` — the sha256 (first 12 hex digits) of a plan's summary figures;
- :func:`entries_from_plan` — the ledger rows of one plan (its treated zones);
- :func:`read_ledger` — read and check a ledger file (one clear error for a malformed one);
- :func:`check_ledger` — before a plan runs: the ledger is readable and its folder exists;
- :func:`append_plan` — add a plan's rows, under a lock, through an atomic rewrite; a plan version
  already in the ledger is skipped;
- :func:`season_totals` — product, nitrogen and chloride over a season, per zone area, by agent and
  against the season limits of a plan file's ``[ledger]`` table.

The format is described in ``docs/logistics.md`` ("Venue ledger").
"""

from __future__ import annotations

import contextlib
import csv
import datetime as dt
import hashlib
import io
import json
import math
import re
import time
from collections.abc import Iterable, Iterator
from dataclasses import dataclass
from pathlib import Path
from typing import Any

from courseplan.errors import InputError, OutputError

COLUMNS = ("entry_id", "plan_version", "written_at", "venue", "date", "plan", "agent", "zone_id", "area_m2",
           "product_kg", "nitrogen_kg", "chloride_kg", "source")
"""The ledger's columns, in order (the header line)."""

NUMBERS = ("area_m2", "product_kg", "nitrogen_kg", "chloride_kg")
SOURCES = ("plan", "spread records")
"""``plan``: written by ``courseplan plan``; ``spread records``: what crews recorded (a later replan)."""

LOCK_WAIT_S = 10.0
"""How long an append waits for another run's ledger lock before giving up [s]."""

_VERSION = re.compile(r"^[0-9a-f]{12}$")
_FIX = "correct or remove that line (the ledger was left as it was)"


def plan_version(date: str | None, plan: str, agent: str,
                 zone_product_kg: Iterable[tuple[Any, float]]) -> str:
    """The version of a plan: sha256 of its summary figures, first 12 hex digits.

    The figures are the race date, the plan name, the agent and each zone's product rounded to
    0.1 kg (zones in id order), so rerunning an unchanged plan gives the same version.
    """
    zones = sorted(((str(z), f"{round(float(kg), 1):.1f}") for z, kg in zone_product_kg),
                   key=lambda t: (len(t[0]), t[0]))  # zone 2 before zone 10
    doc = json.dumps({"date": date, "plan": plan, "agent": agent, "zones": zones}, sort_keys=True,
                     ensure_ascii=False, separators=(",", ":"))
    return hashlib.sha256(doc.encode("utf-8")).hexdigest()[:12]


def entries_from_plan(result, *, venue: str | None = None, source: str = "plan",
                      written_at: str | None = None) -> tuple[str, list[dict[str, Any]]]:
    """The plan version and the ledger rows of a :class:`~courseplan.pipeline.PlanResult`.

    One row per zone with product (P50 > 0): what the plan puts on the hill that day.
    """
    s = result.settings
    z = result.zones
    version = plan_version(s.plan.date, s.plan.name, result.agent.name,
                           zip(z["zone_id"].tolist(), z["product_kg"].tolist(), strict=True))
    at = written_at or dt.datetime.now(dt.UTC).isoformat(timespec="seconds")
    rows = []
    for r in z.itertuples():
        if not float(r.product_kg) > 0:
            continue
        rows.append({"entry_id": f"{version}-{r.zone_id}", "plan_version": version, "written_at": at,
                     "venue": venue or "", "date": s.plan.date or "", "plan": s.plan.name,
                     "agent": str(getattr(r, "agent", result.agent.name)), "zone_id": str(r.zone_id),
                     "area_m2": float(r.area_m2),
                     "product_kg": float(r.product_kg), "nitrogen_kg": float(r.nitrogen_kg),
                     "chloride_kg": float(r.chloride_kg), "source": source})
    return version, rows


@dataclass(frozen=True)
class LedgerFile:
    """A ledger as read: its rows (numbers as floats), the separator and the text it was read from."""

    path: Path
    rows: tuple[dict[str, Any], ...]
    delimiter: str = ","
    text: str = ""

    @property
    def versions(self) -> set[str]:
        """The plan versions in the ledger."""
        return {r["plan_version"] for r in self.rows}


def read_ledger(path: Path | str) -> LedgerFile:
    """Read and check a ledger file.

    Raises
    ------
    MissingInputError
        The file does not exist or cannot be read.
    InputError
        The header is not the ledger's, or a line is malformed (the line is named).
    """
    from courseplan.io.files import check_readable, decimal_number, read_text, sniff_delimiter

    p = check_readable(Path(path), "ledger")
    text = read_text(p, "ledger")
    if not text.strip():
        return LedgerFile(p, (), ",", "")
    delim = sniff_delimiter(text)
    number = decimal_number if delim == ";" else float
    reader = csv.reader(io.StringIO(text), delimiter=delim)
    header = None
    rows: list[dict[str, Any]] = []
    seen: set[str] = set()
    for cells in reader:
        line = reader.line_num
        if not any(c.strip() for c in cells):
            continue
        if header is None:
            header = [c.strip() for c in cells]
            if tuple(header) != COLUMNS:
                raise InputError(f"the header is not a courseplan ledger's (expected {','.join(COLUMNS)})",
                                 where=f"{p}, line {line}", fix="name a ledger file courseplan wrote, or "
                                 "restore its header line (the ledger was left as it was)")
            continue
        if len(cells) != len(COLUMNS):
            raise InputError(f"{len(cells)} fields instead of {len(COLUMNS)}", where=f"{p}, line {line}",
                             fix=_FIX)
        row: dict[str, Any] = {k: v.strip() for k, v in zip(COLUMNS, cells, strict=True)}
        for k in NUMBERS:
            try:
                row[k] = number(row[k])
            except ValueError:
                raise InputError(f"{k} {row[k]!r} is not a number", where=f"{p}, line {line}",
                                 fix=_FIX) from None
            if not math.isfinite(row[k]) or row[k] < 0 or (k == "area_m2" and row[k] == 0):
                raise InputError(f"{k} {row[k]} is not a {'positive' if k == 'area_m2' else 'non-negative'} "
                                 "number", where=f"{p}, line {line}", fix=_FIX)
        try:
            dt.date.fromisoformat(row["date"])
        except ValueError:
            raise InputError(f"date {row['date']!r} is not YYYY-MM-DD", where=f"{p}, line {line}",
                             fix=_FIX) from None
        if not _VERSION.match(row["plan_version"]):
            raise InputError(f"plan_version {row['plan_version']!r} is not 12 hex digits",
                             where=f"{p}, line {line}", fix=_FIX)
        for k in ("entry_id", "zone_id", "agent"):
            if not row[k]:
                raise InputError(f"{k} is empty", where=f"{p}, line {line}", fix=_FIX)
        if row["source"] not in SOURCES:
            raise InputError(f"source {row['source']!r} is not one of {', '.join(SOURCES)}",
                             where=f"{p}, line {line}", fix=_FIX)
        if row["entry_id"] in seen:
            raise InputError(f"entry_id {row['entry_id']!r} is there twice", where=f"{p}, line {line}",
                             fix="remove the repeated line (the ledger was left as it was)")
        seen.add(row["entry_id"])
        rows.append(row)
    return LedgerFile(p, tuple(rows), delim, text)


def check_ledger(path: Path | str) -> None:
    """Before a plan runs: an existing ledger must read cleanly, a new one needs an existing folder."""
    p = Path(path)
    if p.exists():
        read_ledger(p)
        return
    folder = p.parent if str(p.parent) else Path(".")
    if not folder.is_dir():
        raise OutputError("the ledger's folder does not exist", where=str(folder),
                          fix="create the folder or change [ledger] file")


@contextlib.contextmanager
def ledger_lock(path: Path, wait_s: float = LOCK_WAIT_S) -> Iterator[None]:
    """Hold the ledger's lock file (``.NAME.courseplan-lock`` beside it), waiting up to *wait_s* for it."""
    from courseplan.io.files import OutputLock

    deadline = time.monotonic() + wait_s
    while True:
        lock = OutputLock(path)
        try:
            lock.__enter__()
            break
        except OutputError:
            if not lock.path.exists() and not path.parent.is_dir():
                raise
            # the other run may have let go between our try and this look: try again until the deadline
            if time.monotonic() >= deadline:
                raise OutputError("another courseplan run is writing to the ledger", where=str(path),
                                  fix=f"run again when it has finished (remove {lock.path} only if no run "
                                      "is going)") from None
            time.sleep(0.05)
    try:
        yield
    finally:
        lock.__exit__(None, None, None)


@dataclass(frozen=True)
class AppendOutcome:
    """What :func:`append_plan` did."""

    path: Path
    version: str
    written: int
    note: str


def append_plan(path: Path | str, result, *, venue: str | None = None, source: str = "plan") -> AppendOutcome:
    """Append a plan's spread to the ledger (created with its header when missing).

    Read, append and rewrite atomically under the ledger lock; a plan version already in the
    ledger is skipped (the note says so).  A malformed ledger raises and is left untouched.
    """
    version, rows = entries_from_plan(result, venue=venue, source=source)
    return append_rows(path, version, rows)


SPREAD_SOURCE = "spread records"
"""Source of the rows a replan appends: what the crews report as spread (these replace that day's plan)."""


def append_spread(path: Path | str, morning, spread, *, venue: str | None = None) -> AppendOutcome:
    """Append what was really spread on the day (a replan's spread records) to the ledger.

    *spread* has ``zone_id`` and ``kg``; nitrogen and chloride follow from the agent (purity ×
    fraction).  The season totals count these rows instead of the morning plan's for that day.
    """
    s, plan_ag = morning.settings, morning.agent
    kg = spread.groupby("zone_id")["kg"].sum()
    mz = morning.zones
    area = dict(zip(mz["zone_id"].astype(int), mz["area_m2"].astype(float), strict=True))
    own = dict(zip(mz["zone_id"].astype(int), mz["agent"], strict=True)) if "agent" in mz.columns else {}
    agents = morning.agents or {plan_ag.name: plan_ag}
    version = plan_version(s.plan.date, f"{s.plan.name} (spread)", plan_ag.name, kg.items())
    at = dt.datetime.now(dt.UTC).isoformat(timespec="seconds")
    rows = []
    for z, k in kg.items():
        if not float(k) > 0:
            continue
        ag = agents.get(own.get(int(z), plan_ag.name), plan_ag)  # the zone's own agent, else the plan's
        purity = s.dosing.purity if s.dosing.purity is not None and ag is plan_ag else ag.purity
        rows.append({"entry_id": f"{version}-{z}", "plan_version": version, "written_at": at, "venue": venue or "",
                     "date": s.plan.date or "", "plan": s.plan.name, "agent": ag.name, "zone_id": str(int(z)),
                     "area_m2": area.get(int(z), float("nan")), "product_kg": float(k),
                     "nitrogen_kg": float(k) * purity * ag.nitrogen_fraction,
                     "chloride_kg": float(k) * purity * ag.chloride_fraction, "source": SPREAD_SOURCE})
    return append_rows(path, version, rows)


def append_rows(path: Path | str, version: str, rows: list[dict[str, Any]]) -> AppendOutcome:
    """Append *rows* of plan *version* to the ledger (see :func:`append_plan`)."""
    from courseplan.io.files import write_text_atomic

    p = Path(path)
    check_ledger(p)
    with ledger_lock(p):
        led = read_ledger(p) if p.exists() else LedgerFile(p, (), ",", "")
        if version in led.versions:
            return AppendOutcome(p, version, 0, f"ledger: plan version {version} is already in {p}; "
                                                "nothing appended")
        if not rows:
            return AppendOutcome(p, version, 0, f"ledger: plan version {version} spreads nothing; "
                                                "nothing appended")
        text = led.text if led.text.strip() else ""
        if text and not text.endswith("\n"):
            text += "\n"
        buf = io.StringIO()
        w = csv.writer(buf, delimiter=led.delimiter, lineterminator="\n")
        if not text:
            w.writerow(COLUMNS)
        for r in rows:
            w.writerow([_cell(r[k], k, led.delimiter) for k in COLUMNS])
        write_text_atomic(p, text + buf.getvalue(), what="ledger")
    return AppendOutcome(p, version, len(rows), f"ledger: {len(rows)} zone entries of plan version {version} "
                                                f"appended to {p}")


def _cell(value: Any, key: str, delimiter: str) -> str:
    if key not in NUMBERS:
        return str(value)
    text = f"{float(value):.1f}" if key == "area_m2" else f"{float(value):.3f}"
    return text.replace(".", ",") if delimiter == ";" else text


LIMITS = (("max_product_kg", "product", "kg"), ("max_nitrogen_kg", "nitrogen", "kg"),
          ("max_chloride_kg", "chloride", "kg"), ("max_product_g_m2", "product", "g/m²"))


def season_totals(rows: Iterable[dict[str, Any]], *, season_from: str | None = None,
                  season_to: str | None = None, limits=None) -> dict[str, Any]:
    """Season totals of a ledger's rows (plain data for the command and ``--json``).

    Parameters
    ----------
    rows
        Ledger rows (:attr:`LedgerFile.rows`).
    season_from, season_to
        First and last race day counted, YYYY-MM-DD (inclusive; default: all).
    limits
        A :class:`~courseplan.settings.Ledger` with the season limits, or None.

    Returns
    -------
    dict
        ``season``, ``plans``, ``days``, ``entries``, ``totals`` (per quantity: ``kg``, ``mean_g_m2``
        over the treated area, ``worst_zone`` and its ``worst_g_m2``), ``treated_area_m2``,
        ``zones`` (per zone id: kg and g/m² summed over the season's days), ``by_agent`` and
        ``limits`` (each with ``limit``, ``used``, ``share_pct`` and ``over``).

    Notes
    -----
    A zone's season load per area is the sum over its entries of ``1000 · kg / area_m2`` [g/m²], so a
    zone whose area changes between plans is still counted day by day; the mean is the season's mass
    over the treated area (each zone id counted once, at its largest area).
    """
    sel = [r for r in rows if (season_from is None or r["date"] >= season_from)
           and (season_to is None or r["date"] <= season_to)]
    # what was really spread wins: a day with spread records (from a replan) counts those, not its plan
    spread_days = {(r["date"], r["plan"]) for r in sel if r.get("source") == SPREAD_SOURCE}
    sel = [r for r in sel if not (r.get("source") == "plan" and (r["date"], r["plan"]) in spread_days)]
    qty = ("product", "nitrogen", "chloride")
    zones: dict[str, dict[str, float]] = {}
    agents: dict[str, dict[str, Any]] = {}
    for r in sel:
        z = zones.setdefault(r["zone_id"], {"area_m2": 0.0, **{f"{q}_kg": 0.0 for q in qty},
                                            **{f"{q}_g_m2": 0.0 for q in qty}})
        z["area_m2"] = max(z["area_m2"], r["area_m2"])
        a = agents.setdefault(r["agent"], {**{f"{q}_kg": 0.0 for q in qty}, "plans": set()})
        a["plans"].add(r["plan_version"])
        for q in qty:
            z[f"{q}_kg"] += r[f"{q}_kg"]
            z[f"{q}_g_m2"] += 1000.0 * r[f"{q}_kg"] / r["area_m2"]
            a[f"{q}_kg"] += r[f"{q}_kg"]
    area = sum(z["area_m2"] for z in zones.values())
    totals = {}
    for q in qty:
        kg = sum(r[f"{q}_kg"] for r in sel)
        worst = max(zones, key=lambda k, q=q: zones[k][f"{q}_g_m2"], default=None)
        if worst is not None and not zones[worst][f"{q}_g_m2"] > 0:
            worst = None
        totals[q] = {"kg": kg, "mean_g_m2": 1000.0 * kg / area if area > 0 else 0.0,
                     "worst_zone": worst, "worst_g_m2": zones[worst][f"{q}_g_m2"] if worst else 0.0}
    out_limits = []
    for key, q, unit in LIMITS:
        lim = getattr(limits, key, None) if limits is not None else None
        if lim is None:
            continue
        used = totals[q]["worst_g_m2"] if unit == "g/m²" else totals[q]["kg"]
        share = 100.0 * used / lim if lim > 0 else (0.0 if used == 0 else math.inf)
        out_limits.append({"key": key, "what": q, "unit": unit, "limit": float(lim), "used": used,
                           "share_pct": share if math.isfinite(share) else None, "over": used > lim})
    dates = sorted({r["date"] for r in sel})
    return {"season": {"from": season_from, "to": season_to, "first_day": dates[0] if dates else None,
                       "last_day": dates[-1] if dates else None},
            "venues": sorted({r["venue"] for r in sel if r["venue"]}),
            "plans": len({r["plan_version"] for r in sel}), "days": len(dates), "entries": len(sel),
            "treated_area_m2": area, "totals": totals,
            "zones": {k: zones[k] for k in sorted(zones, key=lambda k: (len(k), k))},
            "by_agent": {k: {**{f"{q}_kg": v[f"{q}_kg"] for q in qty}, "plans": len(v["plans"])}
                         for k, v in sorted(agents.items())},
            "limits": out_limits}
