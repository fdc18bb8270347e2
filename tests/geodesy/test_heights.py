"""Heights with a geoid model (registry.geodesy.heights) and the configured-model helper."""

from __future__ import annotations

import shutil
import struct

import numpy as np
import pytest

from registry.geodesy.heights import (
    EGM96_LABEL,
    GeoidModel,
    HeightError,
    egm96_fallback,
    ellipsoidal_height_m,
    geoid_undulation_m,
    orthometric_height_m,
)
from registry.geodesy.projsetup import find_grid

EGM96_PATH = find_grid("egm96_15.gtx")
needs_egm96 = pytest.mark.skipif(EGM96_PATH is None, reason="Debian proj-data egm96_15.gtx not installed")


@pytest.mark.parametrize(
    "big_h,n,h",
    [
        # ICSM GDA Technical Manual v2.3 worked example, h = H + N (secondary transcription).
        (347.200, 3.748, 350.948),  # Flinders Peak
        (744.986, 4.869, 749.855),  # Buninyong
    ],
)
def test_h_equals_big_h_plus_n(big_h, n, h):
    assert float(ellipsoidal_height_m(big_h, n)) == pytest.approx(h, abs=5e-4)
    assert float(orthometric_height_m(h, n)) == pytest.approx(big_h, abs=5e-4)


def _gtx_bilinear(path, lat, lon):
    """Independent reader of the NOAA .gtx format: big-endian header (lat0, lon0, dlat, dlon as
    doubles; rows, cols as int32), then rows × cols float32 from the south-west corner, row by row
    northwards (NOAA VDatum grid format, as documented by PROJ's "GTX" resource-file notes)."""
    with open(path, "rb") as fh:
        lat0, lon0, dlat, dlon = struct.unpack(">4d", fh.read(32))
        rows, cols = struct.unpack(">2i", fh.read(8))
        data = np.frombuffer(fh.read(rows * cols * 4), dtype=">f4").reshape(rows, cols).astype(float)
    x = np.mod(lon - lon0, 360.0) / dlon
    y = (lat - lat0) / dlat
    i, j = int(np.floor(y)), int(np.floor(x))
    fy, fx = y - i, x - j
    j1 = (j + 1) % cols
    return (
        data[i, j] * (1 - fx) * (1 - fy)
        + data[i, j1] * fx * (1 - fy)
        + data[i + 1, j] * (1 - fx) * fy
        + data[i + 1, j1] * fx * fy
    )


@needs_egm96
def test_egm96_through_proj_equals_an_independent_bilinear_read():
    model = egm96_fallback()
    rng = np.random.default_rng(96)
    lat = rng.uniform(-89.5, 89.5, 200)
    lon = rng.uniform(-180, 180, 200)
    n = geoid_undulation_m(lat, lon, model=model)
    ref = np.array([_gtx_bilinear(EGM96_PATH, a, b) for a, b in zip(lat, lon, strict=True)])
    assert np.max(np.abs(n - ref)) < 1e-3


@needs_egm96
@pytest.mark.parametrize(
    "lat,lon,n",
    [
        # NGA EGM96 test points (the INTPT.DAT / OUTINTPT.DAT pair distributed with the EGM96 15′ grid)
        # [from memory]. Those are spherical-harmonic values; the 15′ grid interpolated bilinearly
        # differs by a few centimetres, hence 0.1 m.
        (38.6281550, 269.7791550, -31.628),
        (-14.6212170, 305.0211140, -2.969),
        (46.8743190, 102.4487290, -43.575),
        (-23.6174460, 133.8747120, 15.871),
        (38.6254730, 359.9995000, 50.066),
        (-0.4667440, 0.0023000, 17.329),
    ],
)
def test_egm96_against_nga_test_points(lat, lon, n):
    assert float(geoid_undulation_m(lat, lon, model=egm96_fallback())) == pytest.approx(n, abs=0.1)


def test_egm96_is_always_labelled_approximate():
    model = egm96_fallback()
    assert model.approximate and model.label == EGM96_LABEL
    assert EGM96_LABEL == "EGM96 (global model, approximate — not survey grade)"
    assert model.as_dict()["grid"] == "egm96_15.gtx"  # never a server path in output


def test_missing_grid_is_a_clear_error():
    with pytest.raises(HeightError) as info:
        geoid_undulation_m(45.2, -110.6, model=GeoidModel(name="nothing", grid="no_such_geoid.gtx"))
    assert info.value.code == "grid_missing"
    with pytest.raises(HeightError) as info:
        geoid_undulation_m(45.2, -110.6, model=GeoidModel(name="bad", grid="a b.gtx"))
    assert info.value.code == "bad_grid_name"


@needs_egm96
def test_out_of_range_latitude():
    with pytest.raises(HeightError) as info:
        geoid_undulation_m(95.0, 0.0, model=egm96_fallback())
    assert info.value.code == "not_finite"


# --- Django side: which model the office has configured ----------------------------------------


@needs_egm96
def test_configured_office_grid_is_used_and_not_labelled_approximate(settings, tmp_path):
    from registry.selectors.conversion import configured_geoid

    shutil.copy(EGM96_PATH, tmp_path / "office_geoid.gtx")  # stands in for a national grid (invented name)
    settings.REGISTRY = {**settings.REGISTRY, "GEOID_DIR": str(tmp_path), "GEOID_MODEL": "office_geoid.gtx"}
    model, note = configured_geoid()
    assert note is None and model.name == "office_geoid" and not model.approximate
    assert model.grid == str(tmp_path / "office_geoid.gtx")


@needs_egm96
def test_missing_office_grid_falls_back_with_a_note(settings, tmp_path):
    from registry.selectors.conversion import configured_geoid

    settings.REGISTRY = {**settings.REGISTRY, "GEOID_DIR": str(tmp_path), "GEOID_MODEL": "missing.gtx"}
    model, note = configured_geoid()
    assert model.approximate and model.label == EGM96_LABEL
    assert "missing.gtx" in note
