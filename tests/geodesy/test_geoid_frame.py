"""Geoid models tied to their frame (issue 7, item 9).

Independent computation: a direct pyproj pipeline built in each test — PROJ's time-dependent
NAD83(2011) (EPSG:6319) → ITRF2014 (EPSG:7912) transformation evaluated at the epoch, then the EGM96
15′ grid (Debian proj-data ``egm96_15.gtx``) through PROJ's ``vgridshift`` — no registry code on the
reference side. EGM96 gives N above the WGS 84 ellipsoid as WGS 84 (≈ ITRF) places it (Lemoine et
al. 1998, NASA/TP-1998-206861), so a NAD83(2011) height must be brought to ITRF first.
"""

from __future__ import annotations

import json
import os
import shutil
from io import StringIO

import pyproj
import pytest
from django.core.management import call_command

from registry.checks import check_proj
from registry.geodesy.heights import HeightError, egm96_fallback, orthometric_from_ellipsoidal
from registry.selectors.conversion import point_convert

GRID = "/usr/share/proj/egm96_15.gtx"
pytestmark = pytest.mark.skipif(not os.path.exists(GRID), reason="egm96_15.gtx (Debian proj-data) is not installed")


def direct_egm96_height(lat, lon, h, *, from_epsg, epoch):
    """Reference: pyproj 4D transformation to ITRF2014 at the epoch, then EGM96 N by vgridshift."""
    if from_epsg != 7912:
        tr = pyproj.Transformer.from_crs(from_epsg, 7912, always_xy=True, only_best=True, allow_ballpark=False)
        lon, lat, h, _ = tr.transform(lon, lat, h, epoch)
    geoid = pyproj.Transformer.from_pipeline(
        "+proj=pipeline +step +proj=unitconvert +xy_in=deg +xy_out=rad "
        f"+step +proj=vgridshift +grids={GRID} +multiplier=1 +step +proj=unitconvert +xy_in=rad +xy_out=deg"
    )
    _, _, n = geoid.transform(lon, lat, 0.0)
    return h - n, h, n


def run(*args) -> str:
    out = StringIO()
    call_command("convert_point", *args, stdout=out)
    return out.getvalue()


@pytest.mark.parametrize(
    ("lat", "lon", "shift_m"),
    [
        (45.2, -110.6, -0.63),  # the demo district: NAD83(2011) → ITRF2014 ≈ −0.63 m in h
        (28.5, -81.4, -1.54),  # central Florida: ≈ −1.54 m
    ],
)
def test_nad83_height_is_brought_to_itrf_before_egm96(lat, lon, shift_m):
    """Fails on the code before issue 7, which subtracted EGM96 N from the NAD83(2011) height itself."""
    c = point_convert(frame_epsg=6319, epoch_yr=2010.0, lat=lat, lon=lon, h_m=1500.0)
    want_H, want_h_itrf, want_n = direct_egm96_height(lat, lon, 1500.0, from_epsg=6319, epoch=2010.0)
    assert c.orthometric_height_m == pytest.approx(want_H, abs=1e-3)
    assert c.h_geoid_frame_m == pytest.approx(want_h_itrf, abs=1e-4)
    assert c.geoid_height_m == pytest.approx(want_n, abs=1e-4)
    assert c.h_geoid_frame_m - 1500.0 == pytest.approx(shift_m, abs=0.01)  # the size of the old error
    assert abs(c.orthometric_height_m - (1500.0 - c.geoid_height_m)) > 0.5
    assert [s.to_label for s in c.geoid_steps] == ["ITRF2014 (EPSG:7912)"]


def test_itrf_height_needs_no_transformation_and_the_output_says_which_frame():
    data = json.loads(
        run("--lat", "45.2", "--lon", "-110.6", "--h", "1500", "--frame", "7912", "--epoch", "2020", "--json")
    )
    want_H, _, _ = direct_egm96_height(45.2, -110.6, 1500.0, from_epsg=7912, epoch=2020.0)
    assert data["orthometric_height_m"] == pytest.approx(want_H, abs=1e-6)
    assert data["geoid_model"]["frame_epsg"] == 7912 and data["geoid_model"]["frame_change"] == []
    text = run("--lat", "45.2", "--lon", "-110.6", "--h", "1500", "--frame", "6319", "--epoch", "2010")
    assert "h in the geoid model's frame" in text and "for the orthometric height only" in text


def test_office_model_applies_in_its_own_frame(settings, tmp_path):
    # The office installs a model fitted on NAD83(2011) (here the EGM96 file under another name stands in).
    shutil.copy(GRID, tmp_path / "office_geoid.gtx")
    settings.REGISTRY = {
        **settings.REGISTRY,
        "GEOID_DIR": str(tmp_path),
        "GEOID_MODEL": "office_geoid.gtx",
        "GEOID_FRAME": "6319",
    }
    c = point_convert(frame_epsg=6319, epoch_yr=2010.0, lat=45.2, lon=-110.6, h_m=1500.0)
    assert c.geoid_steps == [] and c.h_geoid_frame_m == 1500.0  # NAD83 height used as it is
    _, _, n = direct_egm96_height(45.2, -110.6, 0.0, from_epsg=7912, epoch=2010.0)
    assert c.orthometric_height_m == pytest.approx(1500.0 - n, abs=1e-4)
    # An ITRF2014 height is brought to NAD83(2011) at its epoch first (direct pyproj, the other way).
    c2 = point_convert(frame_epsg=7912, epoch_yr=2020.0, lat=45.2, lon=-110.6, h_m=1500.0)
    tr = pyproj.Transformer.from_crs(7912, 6319, always_xy=True, only_best=True, allow_ballpark=False)
    _, _, h_nad, _ = tr.transform(-110.6, 45.2, 1500.0, 2020.0)
    assert c2.h_geoid_frame_m == pytest.approx(h_nad, abs=1e-4)


def test_office_model_without_its_frame_gives_no_height_and_a_check_error(settings, tmp_path):
    shutil.copy(GRID, tmp_path / "office_geoid.gtx")
    settings.REGISTRY = {
        **settings.REGISTRY,
        "GEOID_DIR": str(tmp_path),
        "GEOID_MODEL": "office_geoid.gtx",
        "GEOID_FRAME": "",
    }
    c = point_convert(frame_epsg=6319, epoch_yr=2010.0, lat=45.2, lon=-110.6, h_m=1500.0)
    assert c.orthometric_height_m is None
    assert any("does not state which frame" in w for w in c.warnings)
    assert "registry.E014" in [m.id for m in check_proj()]
    settings.REGISTRY = {**settings.REGISTRY, "GEOID_FRAME": "5703"}  # a vertical CRS, not a frame
    assert "registry.E015" in [m.id for m in check_proj()]


def test_pure_function_refuses_an_unstated_frame():
    from dataclasses import replace

    with pytest.raises(HeightError) as err:
        orthometric_from_ellipsoidal(
            45.2, -110.6, 1500.0, frame_epsg=6319, epoch_yr=2010.0, model=replace(egm96_fallback(), frame_epsg=None)
        )
    assert err.value.code == "geoid_frame_unknown"
