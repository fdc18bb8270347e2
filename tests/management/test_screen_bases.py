"""The screen_bases command: job code and ad-hoc site, text and --json, refusals."""

from __future__ import annotations

import json
from io import StringIO

import pytest
from django.core.management import CommandError, call_command

from registry.models import SkyView
from tests.services.test_screening import SITE_LAT, SITE_LON, make_job, make_mark


@pytest.fixture
def marks(db):
    make_mark("NB-1", 1000.0, 0.0)
    make_mark("SK-1", 700.0, 90.0, sky=SkyView.OBSTRUCTED)
    make_mark("CK-1", 400.0, 200.0, sigma_h_mm=8.0)


def run(*args) -> str:
    out = StringIO()
    call_command("screen_bases", *args, stdout=out)
    return out.getvalue()


def test_job_json(marks):
    make_job(code="J-CMD")
    data = json.loads(run("J-CMD", "--json", "--as-of", "2025-07-01"))
    cand = data["candidates"][0]
    assert set(cand) >= {
        "code",
        "distance_m",
        "horizontal_95_mm",
        "vertical_95_mm",
        "coverage",
        "excluded",
        "reasons",
        "budget",
    }
    assert cand["code"] == "NB-1" and cand["horizontal_95_mm"] == pytest.approx(
        24.2315, abs=2e-3
    )  # hand value (service test)
    assert [b["term"] for b in cand["budget"]] == ["rtk", "base", "drift", "motion", "setup", "rover", "geoid"]
    assert all(b["description"] for b in cand["budget"])
    assert cand["coverage_words"] == "covers site" and cand["max_height_difference_m"] is None
    assert "best_pair" in data and [c["code"] for c in data["check_marks"]] == ["CK-1"]


def test_job_text(marks):
    make_job(code="J-CMD")
    text = run("J-CMD", "--as-of", "2025-07-01")
    assert "NB-1" in text and "sky_obstructed" in text and "Chosen bases: NB-1" in text
    assert "Caution:" in text and "covers the whole site" in text
    # Coverage words (review S-13) and the height-difference column (N-6): NB-1 covers the site; the site has
    # no heights, so |Δh| is not computed and the output says why.
    assert "covers site" in text and "partial" not in text
    assert "|Δh|: not computed, the site has no heights" in text
    assert "Base term of NB-1: published position's σ" in text
    assert "fixed (ambiguity-resolved) solution" in text  # N-7 caution


def test_ad_hoc(marks, tmp_path):
    f = tmp_path / "site.geojson"
    f.write_text(json.dumps({"type": "Point", "coordinates": [SITE_LON, SITE_LAT]}))
    data = json.loads(
        run(
            "--site-geojson",
            str(f),
            "--frame",
            "6319",
            "--epoch",
            "2025.5",
            "--tol-h-mm",
            "30",
            "--tol-v-mm",
            "40",
            "--rtk-combination",
            "rss",
            "--json",
            "--as-of",
            "2025-07-01",
        )
    )
    assert data["job"] is None and data["settings"]["rtk_combination"] == "rss"
    # RSS at 1 km: hand value 22.1653 mm (service test), JSON to 0.001 mm
    assert data["candidates"][0]["horizontal_95_mm"] == pytest.approx(22.1653, abs=2e-3)


def test_refusals(db, tmp_path):
    with pytest.raises(CommandError, match="No job"):
        run("J-NONE")
    with pytest.raises(CommandError, match="Give a job code"):
        run()
    f = tmp_path / "bad.geojson"
    f.write_text('{"type": "Point", "coordinates": [1]}')
    with pytest.raises(CommandError, match="site_geojson"):
        run("--site-geojson", str(f), "--frame", "6319", "--epoch", "2025.5", "--tol-h-mm", "30", "--tol-v-mm", "40")
    good = tmp_path / "good.geojson"
    good.write_text(json.dumps({"type": "Point", "coordinates": [SITE_LON, SITE_LAT]}))
    with pytest.raises(CommandError, match="frame_epsg"):
        run("--site-geojson", str(good))
    with pytest.raises(CommandError, match="Cannot read"):
        run("--site-geojson", str(tmp_path / "missing.json"), "--frame", "6319")
