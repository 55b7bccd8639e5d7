"""Vector maps of the crew sheets: course outline, treated zones, the crew's zones, the depot.

:func:`map_drawing` draws one map as a reportlab ``Drawing`` in page points, which
:mod:`courseplan.render.sheets` places on the crew sheets and so into their PDF bytes.  The maps read
in black and white: the crew's zones are hatched and outlined in black, other treated zones are light
grey, the course outline is a black line, and every zone carries its number.

Notes
-----
Data in: shapely geometries and GeoDataFrames (``crew``, ``zone_id``, ``course_order``) in the plan's
metric, north-up CRS.  Out: a ``reportlab.graphics.shapes.Drawing``; this module opens no files.

See Also
--------
courseplan.render.sheets : the order and crew sheets (PDF bytes) that hold these maps.
"""

from __future__ import annotations

from typing import Any

from courseplan.render.fonts import register as _register_fonts  # noqa: E402

FONT, FONT_BOLD, FONT_ITALIC = _register_fonts()


def map_drawing(course: Any, treated: Any, mine: Any, depot: tuple[float, float], width: float,
                height: float, *, detail: bool, view_of: tuple[float, float, float, float] | None = None,
                marks: dict[str, tuple[float, float]] | None = None, no_salt: Any = None
                ) -> tuple[Any, tuple[float, float, float, float]]:
    """Draw a vector map: course outline, treated zones (grey), the crew's zones (hatched), depot.

    *marks* names points to draw as a black ring with their name (the course's start and finish);
    those outside the view are left out.  *no_salt* polygons are cross-hatched and outlined dashed.
    """
    import shapely
    from reportlab.graphics.shapes import Drawing, Group, Rect, String
    from reportlab.lib import colors

    pad = 6.0
    mine_u = shapely.union_all(mine.geometry.to_numpy())
    focus = mine_u if detail else course
    x0, y0, x1, y1 = focus.bounds
    if detail:
        dx, dy = x1 - x0, y1 - y0
        grow = 0.12 * max(dx, dy, 1.0)
        x0, y0, x1, y1 = x0 - grow, y0 - grow, x1 + grow, y1 + grow
    # keep the aspect: widen the view to the drawing's shape
    iw, ih = width - 2 * pad, height - 2 * pad
    dx, dy = max(x1 - x0, 1e-6), max(y1 - y0, 1e-6)
    scale = min(iw / dx, ih / dy)
    cx, cy = (x0 + x1) / 2, (y0 + y1) / 2
    vx0, vx1 = cx - iw / scale / 2, cx + iw / scale / 2
    vy0, vy1 = cy - ih / scale / 2, cy + ih / scale / 2

    view_box = shapely.box(pad, pad, width - pad, height - pad)

    def tf(g: Any) -> Any:
        # to page points first, then repair (slivers can self-cross after scaling) and clip
        g = shapely.transform(g, lambda xy: (xy - [vx0, vy0]) * scale + pad)
        return shapely.intersection(shapely.make_valid(g), view_box)

    d = Drawing(width, height)
    d.add(Rect(0, 0, width, height, fillColor=colors.white, strokeColor=colors.black, strokeWidth=0.6))
    g = Group()
    _add_polys(g, tf(course), fill=colors.white, stroke=colors.black, width=0.9)
    others = treated.loc[treated["crew"] != (mine["crew"].iloc[0] if len(mine) else -1)]
    for geom in others.geometry:
        _add_polys(g, tf(geom), fill=colors.Color(0.86, 0.86, 0.86), stroke=colors.Color(0.45, 0.45, 0.45),
                   width=0.3)
    for geom in (no_salt if no_salt is not None else []):
        t = tf(geom)
        _add_polys(g, t, fill=colors.white, stroke=colors.black, width=0.6)
        _add_hatch(g, t, spacing=3.0)
        _add_hatch(g, shapely.transform(t, lambda xy: xy * [-1, 1]), spacing=3.0, mirror=True)
    for geom in mine.geometry:
        t = tf(geom)
        _add_polys(g, t, fill=colors.Color(0.72, 0.72, 0.72) if not detail else colors.Color(0.8, 0.8, 0.8),
                   stroke=colors.black, width=1.1 if detail else 0.5)
        if detail:
            _add_hatch(g, t, spacing=5.0)
    if detail:  # the edges between the crew's zones on top of every hatching, so each zone reads
        for geom in mine.geometry:
            _add_polys(g, tf(geom), fill=None, stroke=colors.black, width=1.1)
    if detail:
        px, py = (depot[0] - vx0) * scale + pad, (depot[1] - vy0) * scale + pad
        taken = [shapely.box(px - 6, py - 5, px + 37, py + 6)]  # the depot symbol and its word
        frame = shapely.box(1, 1, width - 1, height - 1)
        for z in mine.sort_values("course_order").itertuples(index=False):
            t = tf(z.geometry)
            if t.is_empty:
                continue
            label = str(getattr(z, "label", "") or int(z.zone_id))
            _add_label(g, t, label, taken, frame)
        # depot: a black triangle with a label, drawn over everything
        from reportlab.graphics.shapes import Polygon
        g.add(Polygon([px - 5, py - 4, px + 5, py - 4, px, py + 5], fillColor=colors.black,
                      strokeColor=colors.white, strokeWidth=0.6))
        g.add(Rect(px + 6, py - 4, 30, 9, fillColor=colors.white, strokeColor=None))
        g.add(String(px + 7, py - 2, "Depot", fontName=FONT_BOLD, fontSize=7.5))
        from reportlab.graphics.shapes import Circle
        for name, (mx, my) in (marks or {}).items():
            qx, qy = (mx - vx0) * scale + pad, (my - vy0) * scale + pad
            if not (pad <= qx <= width - pad and pad <= qy <= height - pad):
                continue
            g.add(Circle(qx, qy, 3.5, fillColor=colors.white, strokeColor=colors.black, strokeWidth=1.4))
            g.add(Rect(qx + 5, qy - 4, 6 + 4.2 * len(name), 9, fillColor=colors.white, strokeColor=None))
            g.add(String(qx + 6, qy - 2, name, fontName=FONT_BOLD, fontSize=7.5))
        _add_scale_bar(g, scale, pad)
    elif view_of is not None:
        from reportlab.graphics.shapes import Rect as R
        a, b, c2, e = view_of
        r = R((a - vx0) * scale + pad, (b - vy0) * scale + pad, (c2 - a) * scale, (e - b) * scale,
              fillColor=None, strokeColor=colors.black, strokeWidth=0.8, strokeDashArray=[2, 2])
        g.add(r)
        g.add(Rect(2, 2, 50, 10, fillColor=colors.white, strokeColor=None))
        g.add(String(4, 4.5, "Whole course", fontName=FONT, fontSize=7))
    # north arrow (grid north of the plan's CRS)
    nx, ny = width - pad - 8, height - pad - 18
    from reportlab.graphics.shapes import Polygon
    g.add(Polygon([nx - 4, ny, nx + 4, ny, nx, ny + 12], fillColor=colors.black, strokeColor=None))
    g.add(String(nx, ny - 8, "N", fontName=FONT_BOLD, fontSize=7, textAnchor="middle"))
    d.add(g)
    return d, (vx0, vy0, vx1, vy1)


def _add_label(g: Any, geom: Any, label: str, taken: list[Any], frame: Any) -> None:
    """Put a boxed zone number inside its zone where it fits, else beside it with a leader line.

    ``taken`` holds the boxes already used (updated); ``frame`` is the drawing area.
    """
    import math

    import numpy as np
    import shapely
    from reportlab.graphics.shapes import Line, Rect, String
    from reportlab.lib import colors

    w, h = 4.9 * len(label) + 4, 10.0

    def box_at(x: float, y: float) -> Any:
        return shapely.box(x - w / 2, y - h / 2, x + w / 2, y + h / 2)

    def free(b: Any) -> bool:
        return frame.contains(b) and not any(b.intersects(t.buffer(1.0)) for t in taken)

    anchor = geom.representative_point()
    cands: list[tuple[float, float, bool]] = [(anchor.x, anchor.y, False)]
    x0, y0, x1, y1 = geom.bounds
    gx, gy = np.meshgrid(np.arange(x0, x1, 4.0), np.arange(y0, y1, 4.0))
    pts = shapely.points(gx.ravel(), gy.ravel())
    inside = pts[shapely.contains(geom, pts)] if len(pts) else pts
    inside = sorted(inside, key=lambda p: p.distance(anchor))
    cands += [(p.x, p.y, False) for p in inside]
    for r in (16.0, 24.0, 34.0, 46.0, 60.0):
        for k in range(12):
            ang = math.pi * k / 6
            cands.append((anchor.x + r * math.cos(ang), anchor.y + r * math.sin(ang), True))
    x, y, leader = cands[0]
    for cx, cy, ld in cands:
        if free(box_at(cx, cy)):
            x, y, leader = cx, cy, ld
            break
    b = box_at(x, y)
    taken.append(b)
    if leader:
        g.add(Line(anchor.x, anchor.y, x, y, strokeColor=colors.black, strokeWidth=0.6))
    g.add(Rect(x - w / 2, y - h / 2, w, h, fillColor=colors.white, strokeColor=colors.black, strokeWidth=0.5))
    g.add(String(x, y - 2.9, label, fontName=FONT_BOLD, fontSize=8, textAnchor="middle"))


def _rings(geom: Any) -> list[Any]:
    polys = []
    if geom.is_empty:
        return polys
    if geom.geom_type == "Polygon":
        polys = [geom]
    elif hasattr(geom, "geoms"):
        for part in geom.geoms:
            polys += _rings(part)
    return polys


def _add_polys(g: Any, geom: Any, *, fill: Any, stroke: Any, width: float) -> None:
    from reportlab.graphics.shapes import FILL_EVEN_ODD, Path

    for poly in _rings(geom):
        path = Path(fillColor=fill, strokeColor=stroke, strokeWidth=width, fillMode=FILL_EVEN_ODD)
        for ring in [poly.exterior, *poly.interiors]:
            xy = list(ring.coords)
            path.moveTo(*xy[0])
            for p in xy[1:]:
                path.lineTo(*p)
            path.closePath()
        g.add(path)


def _add_hatch(g: Any, geom: Any, spacing: float, mirror: bool = False) -> None:
    """Diagonal hatching clipped to the polygon (reads without colour); *mirror*: *geom* is mirrored in x
    and the lines are mirrored back (the other diagonal)."""
    import numpy as np
    import shapely
    from reportlab.graphics.shapes import Line
    from reportlab.lib import colors

    if geom.is_empty:
        return
    x0, y0, x1, y1 = geom.bounds
    span = (x1 - x0) + (y1 - y0)
    offsets = np.arange(-span, span, spacing)
    lines = shapely.linestrings([[[x0 + o, y0], [x0 + o + span, y0 + span]] for o in offsets])
    for seg in shapely.intersection(lines, geom):
        for part in (seg.geoms if hasattr(seg, "geoms") else [seg]):
            if part.geom_type != "LineString" or part.is_empty:
                continue
            (a, b), (c, d) = part.coords[0], part.coords[-1]
            if mirror:
                a, c = -a, -c
            g.add(Line(a, b, c, d, strokeColor=colors.black, strokeWidth=0.35))


def _add_scale_bar(g: Any, scale: float, pad: float) -> None:
    import math

    from reportlab.graphics.shapes import Rect, String
    from reportlab.lib import colors

    target_m = 60.0 / scale  # about 60 pt long
    exp = 10 ** math.floor(math.log10(target_m))
    length_m = max(s * exp for s in (1, 2, 5) if s * exp <= target_m) if target_m >= 1 else target_m
    w = length_m * scale
    x, y = pad + 4, pad + 4
    g.add(Rect(x - 2, y - 2, w + 4, 16, fillColor=colors.white, strokeColor=None))
    g.add(Rect(x, y, w / 2, 3, fillColor=colors.black, strokeColor=colors.black, strokeWidth=0.5))
    g.add(Rect(x + w / 2, y, w / 2, 3, fillColor=colors.white, strokeColor=colors.black, strokeWidth=0.5))
    g.add(String(x, y + 5, f"{length_m:g} m", fontName=FONT, fontSize=7))
