"""Printable sheets: the order sheet for the logistics lead and one crew sheet per crew (PDF).

Built with reportlab (BSD licence, pure pip).  Every figure printed comes from
:meth:`courseplan.stages.logistics.LogisticsResult.summary`, formatted by :func:`num`, so the sheets and
``summary.json`` agree.  The maps are vector graphics that read in black and white: the crew's zones
are hatched and outlined in black, other treated zones are light grey, the course outline is a black
line, and every zone carries its number; :mod:`courseplan.render.sheetmap` draws them.  The builders
return PDF bytes; :mod:`courseplan.io.outputs` writes them.
"""

from __future__ import annotations

from typing import Any
from xml.sax.saxutils import escape

from courseplan.render.fonts import register as _register_fonts
from courseplan.render.sheetmap import map_drawing

PAGE_MARGIN_PT = 36.0  # 12.7 mm, inside the printable area of common office printers

FONT, FONT_BOLD, FONT_ITALIC = _register_fonts()


def num(value: float | int | None, nd: int = 1) -> str:
    """Figure as printed on the sheets: ``nd`` decimals, no thousands separator; '–' for None."""
    if value is None:
        return "–"
    return f"{float(value):.{nd}f}"


# ---------------------------------------------------------------- public API


def order_pdf(result: Any, *, plan_name: str, plan_date: str | None,
              agent_label: str, cautions: list[str] | tuple[str, ...], issue: str = "") -> bytes:
    """Build the order sheet for the logistics lead (PDF bytes).

    Parameters
    ----------
    result
        :class:`courseplan.stages.logistics.LogisticsResult`.
    plan_name, plan_date
        Printed in the header and footer of every page.
    agent_label
        Agent name as printed.
    cautions
        General cautions (:func:`courseplan.cautions.cautions_for`).

    Returns
    -------
    bytes
        The PDF.
    """
    from reportlab.lib.units import mm
    from reportlab.platypus import Paragraph, Spacer

    s = result.summary()
    o, cr = s["order"], s["crews"]
    lines = [o, *s.get("other_orders", [])]  # one order line per agent (zones with their own agent)
    mixed = len(lines) > 1
    st = _styles()
    story: list[Any] = [
        Paragraph(f"Order sheet – {escape(plan_name)}", st["title"]),
        Paragraph(f"{escape(' + '.join(x['agent_label'] for x in lines) if mixed else agent_label)} · race day "
                  f"{escape(plan_date or 'not set')} · for the logistics lead", st["sub"]),
    ]
    for x in lines:
        story += _order_section(x, st, mixed)
    story += [Spacer(1, 3 * mm), Paragraph("Depots and crews", st["h2"]),
              Paragraph(f"Depot coordinates in {escape(str(cr['crs'] or 'the plan CRS'))}. Bags per depot "
                        "are "
                        "whole bags per zone (P90 + margin). Every crew finishes its first pass "
                        f"early enough for the agent to act ({num(cr['wait_min'], 0)} min); first run at "
                        f"{cr['first_start']}.",
                        st["small"])]
    if o.get("deliveries"):
        story[-1] = Paragraph("What is delivered where and by when: the bags the crews carry, on pallets, "
                              "one depot per crew (the crew's first pass starts there)"
                              + (", and one delivery per agent." if mixed else "."), st["small"])
        head = ["Depot", "Crew", "Lat / lon", *(["Agent"] if mixed else []), "Bags", "kg", "Pallets", "By",
                "2nd pass"]
        by_crew = {c["crew"]: c for c in cr["crews"]}
        deliveries = sorted((d for x in lines for d in x["deliveries"]), key=lambda d: d["crew"])
        body = [[escape(d["depot"]), by_crew[d["crew"]]["label"], f"{d['lat']:.5f} N / {d['lon']:.5f} E",
                 *([escape(d["agent"])] if mixed else []), str(d["bags"]), num(d["kg"], 0),
                 "–" if d["pallets"] is None else str(d["pallets"]), d["deliver_by"],
                 by_crew[d["crew"]]["second_pass"] or "–"] for d in deliveries]
        pallets = [x["pallets"] for x in lines]
        total = ["Total", "", "", *([""] if mixed else []), str(sum(d["bags"] for d in deliveries)),
                 num(sum(d["kg"] for d in deliveries), 0), "–" if None in pallets else str(sum(pallets)), "", ""]
        widths = [18, 14, 30, 14, 12, 16, 12, 12, 14] if mixed else [18, 14, 40, 12, 16, 14, 12, 16]
        story.append(_grid_table(head, body, st, total=total, widths=widths))
    else:
        head = ["Crew", "Zones", "Depot x", "Depot y", "Bags", "kg in bags", "Start", "2nd pass"]
        body = [[c["label"], _zone_span(c["zone_ids"]), num(c["depot_x"]), num(c["depot_y"]), str(c["bags"]),
                 num(c["bags"] * c["bag_kg"]), c["start"], c["second_pass"] or "–"] for c in cr["crews"]]
        story.append(_grid_table(head, body, st, total=None,
                                 widths=[18, 38, 22, 22, 12, 20, 14, 16]))
    story += _notes_and_cautions([n for n in cr["notes"] if n.startswith("SHORTFALL")], cautions, st)
    return _build(story, plan_name, plan_date, "Order sheet", issue)


def _order_section(o: dict, st: dict, mixed: bool) -> list:
    """The order of one agent: masses, bags, packages, pallets, cost, what it puts on the hill, storage."""
    from reportlab.lib.units import mm
    from reportlab.platypus import Paragraph, Spacer

    story: list[Any] = [Spacer(1, 3 * mm), Paragraph("Order" + (f": {escape(o['agent_label'])}" if mixed else ""),
                                                      st["h2"])]
    rows = [
        ["Product mass P50 (planned dose)", f"{num(o['p50_kg'])} kg"],
        ["Product mass P90", f"{num(o['p90_kg'])} kg"],
        ["Safety margin on P90", f"{num(o['margin_pct'])} %"],
        ["Needed: P90 + margin", f"{num(o['needed_kg'])} kg"],
        ["Bags handed out to crews (whole bags per zone)",
         f"{o['bags_handed_out']} × {num(o['bag_kg'])} kg = {num(o['handed_out_kg'])} kg"],
    ]
    for p in o["packages"]:
        rows.append([f"Order: {p['kind']}s of {num(p['size_kg'])} kg",
                     f"{p['count']} × {num(p['size_kg'])} kg = {num(p['kg'])} kg"])
    rows += [
        ["Total ordered", f"{num(o['order_kg'])} kg = {num(o['tonnes'], 3)} t"],
        ["Pallets (bags per pallet; one place per big bag)",
         "unknown: set [logistics] bags_per_pallet" if o["pallets"] is None else str(o["pallets"])],
        ["Cost", "no price given" if o["cost"] is None else
         f"{num(o['cost'], 2)} {o['currency']} ({num(o['price_per_kg'], 2)} {o['currency']}/kg)"],
    ]
    story.append(_kv_table(rows, st))
    if o["big_bags"]:
        story.append(Paragraph("Big bags go to depots a machine can reach; crews fill their "
                               f"{num(o['bag_kg'])} kg bags from them there.", st["small"]))
    story += [Spacer(1, 3 * mm), Paragraph("What the plan puts on the hill" + (f" ({escape(o['agent'])})" if mixed
                                                                               else ""), st["h2"]),
              _kv_table([["Nitrogen",
                          f"{num(o['nitrogen_kg'])} kg (P50), {num(o['nitrogen_p90_kg'])} kg (P90)"],
                         ["Chloride",
                          f"{num(o['chloride_kg'])} kg (P50), {num(o['chloride_p90_kg'])} kg (P90)"]], st),
              Spacer(1, 3 * mm), Paragraph("Storage", st["h2"])]
    story += [Paragraph("• " + escape(c), st["body"]) for c in o["storage_cautions"]]
    return story


def crews_pdf(result: Any, course_geom: Any, *, plan_name: str,
              plan_date: str | None, agent_label: str, cautions: list[str] | tuple[str, ...],
              issue: str = "", marks: dict[str, tuple[float, float]] | None = None,
              no_salt: Any = None) -> bytes:
    """Build the crew sheets, one page per crew (PDF bytes).

    Each page: a map of the crew's zones on the course outline (with zone numbers and the depot), an
    overview of the whole course, the zones table in walking order (zone, section, surface area, dose
    P50/P90, passes, bags, handfuls, advice), totals, timing, the hand-spreading guide and the cautions.

    Parameters
    ----------
    result
        :class:`courseplan.stages.logistics.LogisticsResult`.
    course_geom
        Course outline (shapely polygon in the zones' CRS); None draws the zones' outline instead.
    plan_name, plan_date, agent_label, cautions
        As for :func:`order_pdf`.

    Returns
    -------
    bytes
        The PDF.
    """
    import shapely
    from reportlab.lib.units import mm
    from reportlab.platypus import KeepInFrame, PageBreak, Paragraph, Spacer, Table, TableStyle

    from courseplan.render.layers import fixed_dose_text

    zt = result.zones
    doses = zt.get("edit_dose_g_m2", [None] * len(zt))
    fixed = {int(i): fixed_dose_text(d) for i, d in zip(zt["zone_id"], doses, strict=True)
             if fixed_dose_text(d)}
    labels = {o.agent: o.agent_label for o in result.order_lines}
    plan_agent = result.order.agent
    own = {int(i): labels.get(a, a) for i, a in zip(zt["zone_id"], zt.get("agent", [plan_agent] * len(zt)),
                                                    strict=True) if a != plan_agent}  # zones with their own agent

    s = result.summary()
    cr = s["crews"]
    st = _styles()
    zones = result.zones
    if course_geom is None:
        course_geom = shapely.union_all(zones.geometry.to_numpy())
    treated_geoms = zones.loc[zones["crew"] > 0]
    frame_w, frame_h = _frame_size()
    story: list[Any] = []
    if not cr["crews"]:
        story.append(Paragraph(f"Crew sheets – {escape(plan_name)}", st["title"]))
        story.append(Paragraph("No zone needs treatment: no crews.", st["body"]))
        story += _notes_and_cautions(cr["notes"], cautions, st)
    for n, c in enumerate(cr["crews"]):
        if c.get("work"):
            story.append(KeepInFrame(frame_w, frame_h, _race_day_page(
                c, cr, course_geom, treated_geoms, plan_name=plan_name, plan_date=plan_date,
                agent_label=agent_label, cautions=cautions, issue=issue, st=st, marks=marks,
                no_salt=no_salt, fixed=fixed, own=own), mode="shrink"))
            if n < len(cr["crews"]) - 1:
                story.append(PageBreak())
            continue
        mine = treated_geoms.loc[treated_geoms["crew"] == c["crew"]]
        depot = (c["depot_x"], c["depot_y"])
        map_w = frame_w * 0.64
        # a smaller map leaves room for long zone lists, so the page needs less shrinking
        map_h = max(55.0, 100.0 - 3.0 * max(len(c["zones"]) - 12, 0)) * mm
        detail, view = map_drawing(course_geom, treated_geoms, mine, depot, map_w, map_h, detail=True)
        over, _ = map_drawing(course_geom, treated_geoms, mine, depot, frame_w * 0.34, 40 * mm,
                              detail=False, view_of=view)
        key = _kv_table([
            ["Start", c["start"]],
            ["Pre-race work done by", c["done_by"]],
            ["First race start", cr["first_start"]],
            ["Second pass", c["second_pass"] or "none"],
            ["Depot x / y", f"{num(c['depot_x'])} / {num(c['depot_y'])}"],
            ["Bags at depot", f"{c['bags']} × {num(c['bag_kg'])} kg"],
            ["Work (all passes)", f"{num(c['work_min'], 0)} min"],
        ], st, small=True, widths=(0.44, 0.56), total_w=frame_w * 0.34)
        side = Table([[over], [Spacer(1, 2 * mm)], [key]], colWidths=[frame_w * 0.34])
        side.setStyle(TableStyle([("LEFTPADDING", (0, 0), (-1, -1), 0), ("RIGHTPADDING", (0, 0), (-1, -1), 0),
                                  ("TOPPADDING", (0, 0), (-1, -1), 0), ("BOTTOMPADDING", (0, 0), (-1, -1), 0),
                                  ("VALIGN", (0, 0), (-1, -1), "TOP")]))
        top = Table([[detail, side]], colWidths=[frame_w * 0.66, frame_w * 0.34])
        top.setStyle(TableStyle([("VALIGN", (0, 0), (-1, -1), "TOP"), ("LEFTPADDING", (0, 0), (-1, -1), 0),
                                 ("RIGHTPADDING", (0, 0), (-1, -1), 0)]))
        head = ["Zone", "Section", "Area m²", "Dose P50 g/m²", "P90 g/m²", "Passes", "Bags",
                "Handfuls /m² per pass", "Advice"]
        body = [[str(z["zone_id"]), escape(z["section"]), num(z["area_m2"], 0), num(z["dose_g_m2"]),
                 num(z["dose_p90_g_m2"]), str(z["passes"]), str(z["bags"]), num(z["handfuls_m2"], 2),
                 Paragraph(escape(z["advice"] + (f" Dose: {fixed[z['zone_id']]}." if z["zone_id"] in fixed
                                                 else "")), st["cell"])] for z in c["zones"]]
        total = ["Total", f"{len(c['zones'])} zones", num(c["area_m2"], 0), f"{num(c['product_kg'])} kg",
                 f"{num(c['product_p90_kg'])} kg", str(c["passes"]) + " max", str(c["bags"]), "", ""]
        page = [
            Paragraph(f"{escape(c['label'])} – {escape(plan_name)}", st["title"]),
            Paragraph(f"{escape(agent_label)} · race day {escape(plan_date or 'not set')} · zones in walking "
                      f"order (course order {c['first_course_order']}–{c['last_course_order']})", st["sub"]),
            Spacer(1, 2 * mm), top, Spacer(1, 2 * mm),
            _grid_table(head, body, st, total=total, widths=[11, 23, 15, 17, 15, 14, 12, 20, 51]),
            Spacer(1, 2 * mm),
            Paragraph("<b>Hand spreading (an estimate):</b> one handful is about "
                      f"{num(cr['handful_g'], 0)} g; "
                      "throw the handfuls per square metre in the table on each pass. Spread the P50 dose "
                      "evenly over the whole width, turn apexes included, with no clumps; the bags hold P90 "
                      "plus margin, so some may come back.", st["body"]),
            Paragraph(f"<b>Timing:</b> start {c['start']}; first pass done by {c['done_by']} (the agent "
                      f"needs {num(cr['wait_min'], 0)} min to act; first run at {cr['first_start']})." + (f" Second pass starts at {c['second_pass']}." if c["second_pass"]
                                          else ""), st["body"]),
        ]
        page += _notes_and_cautions(cr["plan_notes"] + c["notes"], cautions, st)
        story.append(KeepInFrame(frame_w, frame_h, page, mode="shrink"))
        if n < len(cr["crews"]) - 1:
            story.append(PageBreak())
    return _build(story, plan_name, plan_date, "Crew sheets", issue)


def _loads(depot: dict) -> str:
    """``: 20 bags of NaCl, 4 of urea`` when a depot holds bags of several agents, else ``""``."""
    loads = depot.get("loads") or []
    if len(loads) < 2:
        return ""
    return ": " + ", ".join(f"{x['bags']} of {escape(x['agent'])}" for x in loads)


def _race_day_page(c: dict, cr: dict, course_geom: Any, treated_geoms: Any, *, plan_name: str,
                   plan_date: str | None, agent_label: str, cautions: Any, issue: str, st: dict,
                   marks: dict[str, tuple[float, float]] | None = None, no_salt: Any = None,
                   fixed: dict | None = None, own: dict | None = None) -> list[Any]:
    """One crew's page: crew, depot, map, then the work in order (zone, pass, window, dose, bags, rate)."""
    from reportlab.lib.units import mm
    from reportlab.platypus import Paragraph, Spacer

    frame_w, _ = _frame_size()
    d = c.get("depot") or {}
    mine = treated_geoms.loc[treated_geoms["crew"] == c["crew"]]
    depot = (c["depot_x"], c["depot_y"])
    map_h = max(50.0, 85.0 - 2.5 * max(len(c["work"]) - 10, 0)) * mm
    detail, _ = map_drawing(course_geom, treated_geoms, mine, depot, frame_w, map_h, detail=True, marks=marks,
                            no_salt=no_salt)
    hand = any(w["handfuls_m2"] is not None for w in c["work"])
    head = ["Zone", "Pass", "Spread from – to", "Dose g/m²", "Bags",
            "Handfuls per m²" if hand else "Spreader kg/min"]
    own = own or {}
    body = [[f"<b>{escape(str(w['label']))}</b>" + (f"<br/>{escape(own[w['zone_id']])}" if w.get("zone_id") in own
                                                     else ""), str(w["pass_no"]), f"{w['from']} – {w['to']}",
             f"<b>{num(w['dose_g_m2'], 0)}</b>", str(w["bags"]),
             num(w["handfuls_m2"] if hand else w["flow_kg_min"], 1)] for w in c["work"]]
    total = ["Total", "", "", "", str(sum(w["bags"] for w in c["work"])), ""]
    rate = (f"one handful is about {num(cr['handful_g'], 0)} g" if hand else
            "set the spreader to the flow shown at a steady walking pace")
    page = [
        Paragraph(f"{escape(c['label'])} – {escape(plan_name)}", st["title"]),
        Paragraph(f"{escape(agent_label)} · race day {escape(plan_date or 'not set')} · "
                  f"{escape(cr.get('method') or '')}" + (f" · {escape(issue)}" if issue else ""), st["sub"]),
        Spacer(1, 1.5 * mm),
        Paragraph(f"<b>Depot:</b> {escape(str(d.get('name', '')))} at {d.get('lat', 0):.5f} N, "
                  f"{d.get('lon', 0):.5f} E — {d.get('bags', c['bags'])} bags of {num(c['bag_kg'], 0)} kg "
                  f"({num(d.get('kg', 0), 0)} kg{_loads(d)}) waiting there from "
                  f"{escape(str(d.get('deliver_by', '')))}", st["body"]),
        Spacer(1, 1.5 * mm), detail, Spacer(1, 1.5 * mm),
        _grid_table(head, body, st, total=total, widths=[14, 10, 30, 18, 12, 22]),
        Spacer(1, 1.5 * mm),
        *[Paragraph(f"<b>Zone {escape(lab)}:</b> {escape(text)}.", st["body"]) for lab, text in dict.fromkeys(
            (str(w["label"]), fixed[w.get("zone_id")]) for w in c["work"]
            if w.get("zone_id") in (fixed or {}))],
        *[Paragraph(f"<b>Zone {escape(lab)}:</b> {escape(text)} from its own bags, not {escape(agent_label)}.",
                    st["body"]) for lab, text in dict.fromkeys((str(w["label"]), own[w["zone_id"]]) for w in c["work"]
                                                               if w.get("zone_id") in own)],
        Paragraph("Hatched and outlined: <b>your zones</b>; grey: other crews' zones"
                  + ("; cross-hatched: <b>no salt</b> (finish area, streams, cables)."
                     if no_salt is not None and len(no_salt) else "."), st["small"]),
        Paragraph(f"Work down the table. Spread the dose shown evenly over the whole width, turn apexes "
                  f"included, no clumps; {rate}. Be off the course by the end of each window: inspection at "
                  f"the first pass's end, the next run at the break's end.", st["body"]),
    ]
    page += _notes_and_cautions(c["notes"], cautions, st)
    return page


# ---------------------------------------------------------------- pieces


def _styles() -> dict[str, Any]:
    from reportlab.lib.styles import ParagraphStyle

    base = ParagraphStyle("body", fontName=FONT, fontSize=9, leading=11.5)
    return {
        "title": ParagraphStyle("title", parent=base, fontName=FONT_BOLD, fontSize=15, leading=18),
        "sub": ParagraphStyle("sub", parent=base, fontSize=9.5, leading=12),
        "h2": ParagraphStyle("h2", parent=base, fontName=FONT_BOLD, fontSize=11, leading=14,
                             spaceBefore=2, spaceAfter=2),
        "body": base,
        "small": ParagraphStyle("small", parent=base, fontSize=8, leading=10),
        "cell": ParagraphStyle("cell", parent=base, fontSize=8, leading=9.5),
        "caution": ParagraphStyle("caution", parent=base, fontSize=7.5, leading=9.2, leftIndent=8,
                                  firstLineIndent=-8),
    }


def _frame_size() -> tuple[float, float]:
    from reportlab.lib.pagesizes import A4

    w, h = A4
    return w - 2 * PAGE_MARGIN_PT, h - 2 * PAGE_MARGIN_PT - 14.0  # room for the footer


def _zone_span(ids: list[int]) -> str:
    if not ids:
        return "–"
    return str(ids[0]) if len(ids) == 1 else f"{ids[0]}–{ids[-1]} ({len(ids)})"


def _kv_table(rows: list[list[str]], st: dict[str, Any], *, small: bool = False,
              widths: tuple[float, float] = (0.55, 0.45), total_w: float | None = None) -> Any:
    from reportlab.lib import colors
    from reportlab.platypus import Paragraph, Table, TableStyle

    total_w = total_w or _frame_size()[0]
    style = st["cell"] if small else st["body"]
    data = [[Paragraph(escape(k), style), Paragraph(escape(v), style)] for k, v in rows]
    t = Table(data, colWidths=[total_w * widths[0], total_w * widths[1]])
    t.setStyle(TableStyle([
        ("GRID", (0, 0), (-1, -1), 0.4, colors.black),
        ("BACKGROUND", (0, 0), (0, -1), colors.Color(0.9, 0.9, 0.9)),
        ("VALIGN", (0, 0), (-1, -1), "MIDDLE"),
        ("TOPPADDING", (0, 0), (-1, -1), 1.5), ("BOTTOMPADDING", (0, 0), (-1, -1), 1.5),
    ]))
    return t


def _grid_table(head: list[str], body: list[list[Any]], st: dict[str, Any], *, total: list[str] | None,
                widths: list[float]) -> Any:
    from reportlab.lib import colors
    from reportlab.platypus import Paragraph, Table, TableStyle

    frame_w = _frame_size()[0]
    scale = frame_w / sum(widths)
    hstyle = st["cell"].clone("head", fontName=FONT_BOLD)
    data: list[list[Any]] = [[Paragraph(escape(h), hstyle) for h in head]]
    data += [[Paragraph(c, st["cell"]) if isinstance(c, str) else c for c in row] for row in body]
    if total is not None:
        data.append([Paragraph(f"<b>{c}</b>", st["cell"]) for c in total])
    t = Table(data, colWidths=[w * scale for w in widths], repeatRows=1)
    cmds = [
        ("GRID", (0, 0), (-1, -1), 0.4, colors.black),
        ("BACKGROUND", (0, 0), (-1, 0), colors.Color(0.82, 0.82, 0.82)),
        ("VALIGN", (0, 0), (-1, -1), "MIDDLE"),
        ("TOPPADDING", (0, 0), (-1, -1), 1.5), ("BOTTOMPADDING", (0, 0), (-1, -1), 1.5),
    ]
    for r in range(2, len(data) - (1 if total is not None else 0), 2):  # zebra rows help on grey prints
        cmds.append(("BACKGROUND", (0, r), (-1, r), colors.Color(0.95, 0.95, 0.95)))
    if total is not None:
        cmds.append(("LINEABOVE", (0, -1), (-1, -1), 1.2, colors.black))
    t.setStyle(TableStyle(cmds))
    return t


def _notes_and_cautions(notes: list[str], cautions: list[str] | tuple[str, ...], st: dict[str, Any]
                        ) -> list[Any]:
    from reportlab.lib.units import mm
    from reportlab.platypus import Paragraph, Spacer

    out: list[Any] = []
    if notes:
        out.append(Spacer(1, 2 * mm))
        out += [Paragraph("<b>Note:</b> " + escape(n), st["small"]) for n in notes]
    out += [Spacer(1, 2 * mm), Paragraph("<b>Cautions</b>", st["small"])]
    out += [Paragraph("• " + escape(c), st["caution"]) for c in cautions]
    return out


def _build(story: list[Any], plan_name: str, plan_date: str | None, kind: str, issue: str = "") -> bytes:
    """Lay out *story* on A4 pages with the footer; return the PDF bytes."""
    import io

    from reportlab.lib.pagesizes import A4
    from reportlab.platypus import SimpleDocTemplate

    def footer(canvas: Any, doc: Any) -> None:
        canvas.saveState()
        canvas.setFont(FONT, 7.5)
        text = f"{plan_name} · {plan_date or 'date not set'} · {kind}{' · ' + issue if issue else ''} · page {doc.page}"
        canvas.drawString(PAGE_MARGIN_PT, PAGE_MARGIN_PT * 0.55, text)
        canvas.drawRightString(A4[0] - PAGE_MARGIN_PT, PAGE_MARGIN_PT * 0.55,
                               "Planning figures only – see the cautions")
        canvas.restoreState()

    buf = io.BytesIO()
    doc = SimpleDocTemplate(buf, pagesize=A4, leftMargin=PAGE_MARGIN_PT, rightMargin=PAGE_MARGIN_PT,
                            topMargin=PAGE_MARGIN_PT, bottomMargin=PAGE_MARGIN_PT + 14.0,
                            title=f"{kind} – {plan_name}", author="courseplan")
    doc.build(story, onFirstPage=footer, onLaterPages=footer)
    return buf.getvalue()
