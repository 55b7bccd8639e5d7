"""Write the offline HTML map (the page itself is built by :mod:`courseplan.render.webmap`)."""

from __future__ import annotations

import os
import tempfile
from pathlib import Path
from typing import Any

from courseplan.errors import OutputError


def write_map_html(path: Path | str, page: str) -> Path:
    """Write an HTML page atomically: to a temporary name beside *path*, then moved into place.

    Parameters
    ----------
    path
        Target file (its folder must exist).
    page
        The HTML text (UTF-8).

    Raises
    ------
    OutputError
        When the folder is missing or the file cannot be written.
    """
    p = Path(path)
    if not p.parent.is_dir():
        raise OutputError("the map's folder does not exist", where=str(p.parent),
                          fix="create the folder or choose another output path")
    tmp = None
    try:
        fd, tmp = tempfile.mkstemp(prefix=f".{p.name}.", suffix=".part", dir=p.parent)
        with os.fdopen(fd, "w", encoding="utf-8", newline="\n") as fh:
            fh.write(page)
        os.replace(tmp, p)
        tmp = None
    except OSError as exc:
        raise OutputError(f"cannot write the map ({exc.strerror or exc})", where=str(p),
                          fix="check free space and permissions") from None
    finally:
        if tmp is not None and os.path.exists(tmp):
            os.unlink(tmp)
    return p


def write_map(path: Path | str, zones: Any, course: Any, **kwargs: Any) -> Path:
    """Build the map with :func:`courseplan.render.webmap.render_map_html` and write it to *path*.

    Keyword arguments go to ``render_map_html`` (``title``, ``agent_label`` and ``cautions`` are
    required there).
    """
    from courseplan.render.webmap import render_map_html

    return write_map_html(path, render_map_html(zones, course, **kwargs))


def context_from_file(path: Path | str, kind: str = "terrain", *, band: int = 1, max_pixels: int = 640):
    """Read a DEM or sun raster and make the map's context picture from it.

    Reads a decimated overview (about ``2 × max_pixels`` on the long side) rather than every cell.
    """
    import rasterio
    from rasterio.enums import Resampling

    from courseplan.errors import MissingInputError
    from courseplan.render.webmap import context_from_raster

    p = Path(path)
    if not p.is_file():
        raise MissingInputError("context raster not found", where=str(p), fix="check the path")
    with rasterio.open(p) as src:
        f = max(1, max(src.width, src.height) // (2 * max_pixels))
        h, w = max(1, src.height // f), max(1, src.width // f)
        values = src.read(band, out_shape=(h, w), resampling=Resampling.average, masked=True)
        transform = src.transform * src.transform.scale(src.width / w, src.height / h)
        arr = values.filled(float("nan")).astype("float64")
        return context_from_raster(arr, transform, src.crs, kind, max_pixels=max_pixels)
