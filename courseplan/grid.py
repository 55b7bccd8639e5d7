"""A raster window in the working CRS: values, nodata mask and georeferencing (no file access)."""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from affine import Affine
from pyproj import CRS


@dataclass(frozen=True)
class Grid:
    """A 2-D raster window.

    Attributes
    ----------
    values
        float32 array, NaN where there is no data.
    transform
        Affine transform from (col, row) to working-CRS coordinates [m].
    crs
        The working (metric) CRS.
    source
        Where the values came from (file name and band), for provenance.
    """

    values: np.ndarray
    transform: Affine
    crs: CRS
    source: str = ""

    @property
    def shape(self) -> tuple[int, int]:
        """Rows and columns."""
        return self.values.shape  # type: ignore[return-value]

    @property
    def cell_size(self) -> tuple[float, float]:
        """Cell width and height [m] (both positive)."""
        return abs(self.transform.a), abs(self.transform.e)

    @property
    def cell_area_m2(self) -> float:
        """Planimetric area of one cell [m²]."""
        w, h = self.cell_size
        return w * h

    @property
    def bounds(self) -> tuple[float, float, float, float]:
        """(minx, miny, maxx, maxy) [m]."""
        rows, cols = self.shape
        x0, y0 = self.transform * (0, 0)
        x1, y1 = self.transform * (cols, rows)
        return min(x0, x1), min(y0, y1), max(x0, x1), max(y0, y1)

    def cell_centres(self) -> tuple[np.ndarray, np.ndarray]:
        """x and y of the cell centres, as 1-D arrays along columns and rows."""
        rows, cols = self.shape
        t = self.transform
        xs = t.c + t.a * (np.arange(cols) + 0.5)
        ys = t.f + t.e * (np.arange(rows) + 0.5)
        return xs, ys

    def sample(self, x: np.ndarray, y: np.ndarray) -> np.ndarray:
        """Nearest-cell values at points (NaN outside the window)."""
        inv = ~self.transform
        col, row = inv @ (np.asarray(x, float), np.asarray(y, float))
        col = np.floor(col).astype(np.int64)
        row = np.floor(row).astype(np.int64)
        rows, cols = self.shape
        ok = (row >= 0) & (row < rows) & (col >= 0) & (col < cols)
        out = np.full(np.shape(col), np.nan, dtype=np.float64)
        out[ok] = self.values[row[ok], col[ok]]
        return out
