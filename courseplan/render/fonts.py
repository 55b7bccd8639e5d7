"""Fonts of the printed sheets: Source Sans Pro (SIL OFL 1.1) from the `font-source-sans-pro` wheel.

reportlab's built-in Helvetica has no glyphs beyond Latin-1, so Czech, Polish or Slovene names
("Ostrava–Łódź") printed as black boxes.  The TrueType files that ship inside the pip-installed font
package are registered once and embedded (subset) in every PDF; no system font is needed.  Reading
them is reading package data, like Leaflet in :mod:`courseplan.render.assets`.
"""

from __future__ import annotations

from functools import lru_cache

REGULAR = "CoursePlanSans"
BOLD = "CoursePlanSans-Bold"
ITALIC = "CoursePlanSans-Italic"


@lru_cache(maxsize=1)
def register() -> tuple[str, str, str]:
    """Register the sheet fonts with reportlab; return (regular, bold, italic) font names."""
    import importlib.resources as res

    from reportlab.lib.fonts import addMapping
    from reportlab.pdfbase import pdfmetrics
    from reportlab.pdfbase.ttfonts import TTFont

    files = res.files("font_source_sans_pro").joinpath("files")
    for name, file in ((REGULAR, "SourceSansPro-Regular.ttf"), (BOLD, "SourceSansPro-Bold.ttf"),
                       (ITALIC, "SourceSansPro-It.ttf")):
        with res.as_file(files.joinpath(file)) as path:
            pdfmetrics.registerFont(TTFont(name, str(path)))
    addMapping(REGULAR, 0, 0, REGULAR)
    addMapping(REGULAR, 1, 0, BOLD)
    addMapping(REGULAR, 0, 1, ITALIC)
    addMapping(REGULAR, 1, 1, BOLD)
    return REGULAR, BOLD, ITALIC
