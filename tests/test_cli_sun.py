"""``courseplan sun`` end to end on tiny GeoTIFF DEMs written in tmp_path."""

import numpy as np
import pytest
import rasterio
from affine import Affine
from click.testing import CliRunner

from courseplan.cli.sun import sun_command
from courseplan.errors import CRSError, MissingInputError, OverlapError
from courseplan.io.rasters import read_dem

ARGS = ["--date", "2025-03-15", "--start", "09:00", "--end", "15:00", "--step-minutes", "30",
        "--timezone", "Europe/Zurich"]


def from_origin(west, north, xsize, ysize):
    return Affine(xsize, 0.0, west, 0.0, -ysize, north)


def write_dem(path, z, crs="EPSG:32632", transform=None, nodata=-9999.0):
    transform = transform or from_origin(499_900.0, 5_150_100.0, 10.0, 10.0)
    with rasterio.open(path, "w", driver="GTiff", width=z.shape[1], height=z.shape[0], count=1,
                       dtype="float32", crs=crs, transform=transform, nodata=nodata) as ds:
        ds.write(z.astype("float32"), 1)
    return path


@pytest.fixture
def dem(tmp_path):
    z = np.full((20, 20), 1500.0)
    z[0, 0] = -9999.0                                  # one nodata cell
    return write_dem(tmp_path / "dem.tif", z)


def run(*args):
    return CliRunner().invoke(sun_command, [str(a) for a in args])


def test_writes_two_bands_with_names_units_and_tags(dem, tmp_path):
    out = tmp_path / "sun.tif"
    res = run(dem, *ARGS, "--out", out)
    assert res.exit_code == 0, res.output
    assert "wrote" in res.output and "12 steps" in res.output
    with rasterio.open(out) as ds:
        assert ds.count == 2 and ds.crs.to_epsg() == 32632 and ds.shape == (20, 20)
        assert ds.descriptions == ("sun_fraction", "irradiation_wh_m2")
        assert ds.units == ("1", "Wh/m2")
        tags = ds.tags()
        assert tags["date"] == "2025-03-15" and tags["timezone"] == "Europe/Zurich"
        assert tags["window_start"].startswith("2025-03-15T09:00") and "NREL SPA" in tags["method"]
        f, e = ds.read(1), ds.read(2)
    assert np.isnan(f[0, 0]) and np.isnan(e[0, 0])    # nodata stays nodata
    assert np.nanmin(f) == 1.0                          # flat, daytime, no terrain: always in sun
    assert 2000 < np.nanmean(e) < 6000                  # clear March day, 6 h, horizontal [hand range]
    assert not list(tmp_path.glob(".*part"))            # no temporary file left behind


def test_refuses_existing_output_without_overwrite(dem, tmp_path):
    out = tmp_path / "sun.tif"
    out.write_bytes(b"keep me")
    res = run(dem, *ARGS, "--out", out)
    assert res.exit_code == 2 and "exists" in res.output and "--overwrite" in res.output
    assert out.read_bytes() == b"keep me"
    res = run(dem, *ARGS, "--out", out, "--overwrite")
    assert res.exit_code == 0, res.output
    with rasterio.open(out) as ds:
        assert ds.count == 2


def test_geographic_dem_is_reprojected_to_utm(tmp_path):
    z = np.full((30, 40), 1200.0)
    z[10:12, 10:12] = -9999.0
    src = write_dem(tmp_path / "geo.tif", z, crs="EPSG:4326", transform=from_origin(7.9, 46.6, 1e-4, 1e-4))
    out = tmp_path / "sun.tif"
    res = run(src, *ARGS, "--out", out)
    assert res.exit_code == 0, res.output
    with rasterio.open(out) as ds:
        assert ds.crs.to_epsg() == 32632                # 7.9° E lies in UTM zone 32
        assert ds.res[0] == pytest.approx(ds.res[1])
        assert 6 < ds.res[0] < 12                        # 1e-4° ≈ 7.7 m × 11.1 m on the ground
        f = ds.read(1)
    assert np.isnan(f).any() and np.nanmin(f) == 1.0


@pytest.mark.parametrize("extra, text", [
    (["--start", "15:00", "--end", "09:00"], "not after"),
    (["--timezone", "Nowhere/City"], "time zone"),
])
def test_bad_window_is_one_line(dem, tmp_path, extra, text):
    args = list(ARGS)
    for k in range(0, len(extra), 2):
        args[args.index(extra[k]) + 1] = extra[k + 1]
    res = run(dem, *args, "--out", tmp_path / "x.tif")
    assert res.exit_code == 2 and text in res.output
    assert "Traceback" not in res.output and len(res.output.strip().splitlines()) == 1


@pytest.mark.filterwarnings("ignore::rasterio.errors.NotGeoreferencedWarning")
def test_missing_dem_and_missing_crs(tmp_path):
    res = run(tmp_path / "nope.tif", *ARGS, "--out", tmp_path / "x.tif")
    assert res.exit_code == 2 and "not found" in res.output
    with rasterio.open(tmp_path / "nocrs.tif", "w", driver="GTiff", width=4, height=4, count=1,
                       dtype="float32") as ds:
        ds.write(np.ones((1, 4, 4), dtype="float32"))
    res = run(tmp_path / "nocrs.tif", *ARGS, "--out", tmp_path / "x.tif")
    assert res.exit_code == 2 and "no CRS" in res.output
    with pytest.raises(CRSError):
        read_dem(tmp_path / "nocrs.tif")
    with pytest.raises(MissingInputError):
        read_dem(tmp_path / "nope.tif")


def test_read_dem_window_with_margin_and_overlap_error(dem):
    # DEM covers x 499 900–500 100, y 5 149 900–5 150 100 in 10 m cells
    d = read_dem(dem, bounds=(499_990.0, 5_149_990.0, 500_010.0, 5_150_010.0), margin_m=30.0)
    assert d.values.shape == (8, 8)                 # 20 m + 2·30 m = 80 m → 8 cells
    assert d.bounds == pytest.approx((499_960.0, 5_149_960.0, 500_040.0, 5_150_040.0), abs=1e-6)
    with pytest.raises(OverlapError) as err:
        read_dem(dem, bounds=(600_000.0, 5_000_000.0, 600_100.0, 5_000_100.0))
    assert "EPSG:32632" in str(err.value)
