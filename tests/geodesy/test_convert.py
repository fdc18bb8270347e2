"""convert_point: the shared function, the command, the page (/tools/convert/) and /api/convert/."""

from __future__ import annotations

import json
from io import StringIO

import pytest
from django.core.management import CommandError, call_command
from django.urls import reverse

from registry.geodesy.convert import JSON_KEYS, ConversionError, convert_point
from registry.geodesy.heights import EGM96_LABEL


def dms(d, m, s, negative=False):
    v = d + m / 60 + s / 3600
    return -v if negative else v


# ICSM GDA Technical Manual v2.3 worked examples (secondary transcription) and MGA zone 55 values
# [from memory, agreeing with PROJ]: Flinders Peak. GRS80 is the ellipsoid of ITRF2014 too, so the
# frame-free parts (ECEF ↔ geodetic, UTM on the frame's own ellipsoid) can be checked in EPSG:7912.
FLINDERS_XYZ = (-4096088.424, 2929823.084, -3901375.454)
FLINDERS_LAT = dms(37, 57, 3.72030, True)
FLINDERS_LON = dms(144, 25, 29.52442)


def run(*args) -> str:
    out = StringIO()
    call_command("convert_point", *args, stdout=out)
    return out.getvalue()


# --- the shared function ---------------------------------------------------------------------


def test_ecef_input_gives_the_gda_example_in_every_form():
    c = convert_point(frame_epsg=7912, epoch_yr=2020.0, xyz_m=FLINDERS_XYZ)
    assert c.lat_deg == pytest.approx(FLINDERS_LAT, abs=1e-8) and c.lon_deg == pytest.approx(FLINDERS_LON, abs=1e-8)
    assert c.h_m == pytest.approx(350.948, abs=1e-3)
    # MGA zone 55 (UTM 55S on GRS80): E 273 741.297, N 5 796 489.777, k 1.00023056. The cartesian example's
    # longitude is 0.00002″ (≈ 0.5 mm) east of the MGA example's, hence 2 mm here.
    assert c.grid.name == "ITRF2014 / UTM zone 55S"
    assert c.easting_m == pytest.approx(273741.297, abs=2e-3) and c.northing_m == pytest.approx(5796489.777, abs=2e-3)
    assert c.scale_factor == pytest.approx(1.00023056, abs=1e-8)
    assert c.combined_factor == pytest.approx(c.scale_factor * c.elevation_factor, rel=1e-15)


def test_no_geoid_means_no_orthometric_height_and_says_so():
    c = convert_point(frame_epsg=7912, epoch_yr=2020.0, lat="45.2", lon="-110.6", h_m=1500.0, geoid=None)
    assert c.orthometric_height_m is None
    assert any("No geoid model" in w for w in c.warnings)


@pytest.mark.parametrize(
    "kwargs,code,field",
    [
        (dict(lat="45.2", lon="-110.6", h_m=0.0, xyz_m=FLINDERS_XYZ), "one_input_form", "input"),
        (dict(lat="45.2", lon="-110.6"), "incomplete", "input"),
        (dict(lat="45 60 00", lon="-110.6", h_m=0.0), "minutes_out_of_range", "lat"),
        (dict(lat="45.2", lon="-110.6", h_m=20000.0), "out_of_range", "h"),
        (dict(xyz_m=(1.0, 2.0, 3.0)), "out_of_range", "xyz"),
        (dict(en_m=(531416.247, 5005246.07), grid_in=6341), "incomplete", "h"),
        (dict(en_m=(531416.247, 5005246.07), h_m=0.0), "incomplete", "grid_in"),
        (dict(lat="45.2", lon="-110.6", h_m=0.0, grid="6341", grid_explicit=True), "datum_mismatch", "grid"),
    ],
)
def test_bad_input_raises_with_code_and_field(kwargs, code, field):
    with pytest.raises(ConversionError) as info:
        convert_point(frame_epsg=7912, epoch_yr=2020.0, **kwargs)
    assert (info.value.code, info.value.field) == (code, field)


# --- the command -----------------------------------------------------------------------------


def test_command_json_has_the_specified_keys_in_the_target_frame_and_epoch():
    data = json.loads(run("--xyz", *map(str, FLINDERS_XYZ), "--frame", "7912", "--epoch", "2020.0", "--json"))
    assert set(JSON_KEYS) <= set(data)
    assert data["frame"] == {"epsg": 7912, "name": "ITRF2014", "kind": "dynamic"}
    assert data["epoch"] == 2020.0
    assert data["lat_deg"] == pytest.approx(FLINDERS_LAT, abs=1e-8)
    assert data["x_m"] == pytest.approx(FLINDERS_XYZ[0], abs=1e-3)
    assert data["grid_crs"] == {"epsg": None, "name": "ITRF2014 / UTM zone 55S", "custom_code": None}
    assert data["geoid_model"]["label"] == EGM96_LABEL
    assert data["orthometric_height_m"] == pytest.approx(data["h_m"] - data["geoid_model"]["geoid_height_m"], abs=1e-3)


def test_command_text_shows_every_form_with_frame_epoch_and_chain():
    text = run(
        "--lat",
        "45 12 00 N",
        "--lon",
        "110 36 00 W",
        "--h",
        "1500",
        "--frame",
        "7912",
        "--epoch",
        "2024.5",
        "--to-frame",
        "6319",
        "--to-epoch",
        "2010",
    )
    assert "NAD83(2011) (EPSG:6319)" in text and "2010.000 (2010-01-01)" in text
    assert "ITRF2014 (EPSG:7912) at 2024.500 (2024-07-02)" in text
    assert "45°11′59.98412″ N" in text  # DMS to 0.00001″ (value from PROJ's ITRF2014→NAD83(2011) at 2024.5)
    assert "-110.599981880°" in text  # decimal degrees to 9 places
    assert "NAD83(2011) / UTM zone 12N (EPSG:6341)" in text
    assert "Point scale factor k" in text and "Convergence γ" in text and "+0°17′01.84″" in text
    assert "Chain of operations:" in text and "ITRF2014 to NAD83(2011) (1)" in text
    # the 14.5 years are held in NAD83(2011), a plate-fixed frame: the office's plate-fixed rate 0.5 mm/yr
    # (the default) × 14.5 yr = 7.25 mm per axis (hand), not the dynamic-frame 2 mm/yr (29.0 mm)
    assert "assumed rate 0.5 mm/yr per axis × 14.500 yr (plate-fixed frame)" in text
    assert "σ added 7.2 mm per axis" in text or "σ added 7.3 mm per axis" in text
    assert EGM96_LABEL in text and "Cautions:" in text


def test_command_grid_input():
    data = json.loads(
        run(
            "--en",
            "531416.247",
            "5005246.070",
            "--grid-in",
            "6341",
            "--h",
            "1500",
            "--frame",
            "6319",
            "--epoch",
            "2010",
            "--json",
        )
    )
    assert data["lat_deg"] == pytest.approx(45.2, abs=1e-8) and data["lon_deg"] == pytest.approx(-110.6, abs=1e-8)
    assert data["grid_crs"]["epsg"] == 6341
    assert data["easting_m"] == pytest.approx(531416.247, abs=1e-3)


@pytest.mark.parametrize(
    "args,message",
    [
        (
            ["--lat", "45", "--lon", "-110", "--h", "0", "--xyz", "1", "2", "3", "--frame", "7912", "--epoch", "2020"],
            "exactly one input",
        ),
        (["--lat", "45", "--h", "0", "--frame", "7912", "--epoch", "2020"], "both --lat and --lon"),
        (
            ["--lat", "45 12 60", "--lon", "-110", "--h", "0", "--frame", "7912", "--epoch", "2020"],
            "seconds must be below 60",
        ),
        (["--lat", "45", "--lon", "-110", "--h", "0", "--frame", "4326", "--epoch", "2020"], "geographic 3D"),
        (["--lat", "45", "--lon", "-110", "--h", "0", "--frame", "7912", "--epoch", "1500"], "decimal year between"),
        (
            ["--lat", "45", "--lon", "-110", "--h", "0", "--frame", "7912", "--epoch", "2020", "--grid", "6341"],
            "Transform them to the grid's datum",
        ),
        (
            ["--lat", "24", "--lon", "121", "--h", "0", "--frame", "7912", "--epoch", "2020", "--to-frame", "3823"],
            "ballpark",
        ),
        (["--en", "1", "2", "--h", "0", "--frame", "6319", "--epoch", "2020"], "needs the grid"),
    ],
)
def test_command_bad_input_is_a_command_error(args, message):
    with pytest.raises(CommandError, match=message):
        run(*args)


# --- the page --------------------------------------------------------------------------------

PAGE_QUERY = {
    "form": "geodetic",
    "lat": "45 12 00 N",
    "lon": "110 36 00 W",
    "h": "1500",
    "frame": "7912",
    "epoch": "2024.5",
    "to_frame": "6319",
    "to_epoch": "2010",
    "grid": "utm",
}


@pytest.mark.django_db
def test_page_needs_sign_in(client):
    resp = client.get(reverse("web:convert"))
    assert resp.status_code == 302 and "signin" in resp["Location"]


@pytest.mark.django_db
def test_page_needs_a_role(client, make_user):
    client.force_login(make_user("norole"))
    assert client.get(reverse("web:convert")).status_code == 403


@pytest.mark.django_db
def test_page_shows_the_labelled_result(client, viewer):
    client.force_login(viewer)
    empty = client.get(reverse("web:convert"))
    assert empty.status_code == 200 and "Enter a point" in empty.content.decode()
    resp = client.get(reverse("web:convert"), PAGE_QUERY)
    html = resp.content.decode()
    assert resp.status_code == 200
    for text in (
        "NAD83(2011) (EPSG:6319)",
        "2010.000 (2010-01-01)",
        "45°11′59.98412″ N",
        "+0°17′01.84″",
        "Chain of operations",
        "ITRF2014 to NAD83(2011) (1)",
        EGM96_LABEL,
        "Cautions",
    ):
        assert text in html


@pytest.mark.django_db
def test_page_bad_input_shows_the_error_and_answers_400(client, viewer):
    client.force_login(viewer)
    resp = client.get(reverse("web:convert"), {**PAGE_QUERY, "lat": "45 12 60 N"})
    assert resp.status_code == 400
    assert "seconds must be below 60" in resp.content.decode() and "Nothing was computed" in resp.content.decode()
    resp = client.get(reverse("web:convert"), {**PAGE_QUERY, "grid": "6341", "to_frame": ""})
    assert resp.status_code == 400 and "grid&#x27;s datum" in resp.content.decode()


# --- the API ---------------------------------------------------------------------------------

API_QUERY = {
    "lat": "45 12 00 N",
    "lon": "110 36 00 W",
    "h": 1500,
    "frame": "7912",
    "epoch": 2024.5,
    "to_frame": "6319",
    "to_epoch": 2010,
}


@pytest.mark.django_db
def test_api_get_and_post_give_the_command_json(api_client_for, viewer):
    client = api_client_for(viewer)
    got = client.get("/api/convert/", API_QUERY)
    posted = client.post("/api/convert/", API_QUERY, format="json")
    assert got.status_code == 200 and posted.status_code == 200
    cli = json.loads(
        run(
            "--lat",
            "45 12 00 N",
            "--lon",
            "110 36 00 W",
            "--h",
            "1500",
            "--frame",
            "7912",
            "--epoch",
            "2024.5",
            "--to-frame",
            "6319",
            "--to-epoch",
            "2010",
            "--json",
        )
    )
    assert got.json() == posted.json() == cli  # one shared function
    assert set(JSON_KEYS) <= set(got.json())


@pytest.mark.django_db
def test_api_needs_authentication(api_client_for):
    resp = api_client_for(None).get("/api/convert/", API_QUERY)
    assert resp.status_code in (401, 403)
    assert "error" in resp.json()


@pytest.mark.django_db
@pytest.mark.parametrize(
    "change,code,field",
    [
        ({"lat": "95"}, "out_of_range", "lat"),
        ({"frame": "4326"}, "not_geographic_3d", "frame"),
        ({"grid": "6341", "to_frame": ""}, "datum_mismatch", "grid"),
        ({"x": 1.0}, "incomplete", "xyz"),
    ],
)
def test_api_bad_input_is_400_in_the_one_error_shape(api_client_for, viewer, change, code, field):
    resp = api_client_for(viewer).post("/api/convert/", {**API_QUERY, **change}, format="json")
    assert resp.status_code == 400
    err = resp.json()["error"]
    assert err["code"] == code and field in err["details"]


@pytest.mark.django_db
def test_api_missing_required_field(api_client_for, viewer):
    resp = api_client_for(viewer).post("/api/convert/", {"lat": "45", "lon": "-110", "h": 0}, format="json")
    assert resp.status_code == 400
    assert {"frame", "epoch"} <= set(resp.json()["error"]["details"])
