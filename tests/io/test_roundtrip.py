"""Round trip: import → export → import into an empty registry → export again.

The two exports must be byte-identical and the two registries equal field by field. "An empty
registry" is the state before the first import, restored by rolling a savepoint back (the audit trail
and published positions cannot be deleted, by design). Marks are invented.
"""

from __future__ import annotations

import csv
import datetime as dt
import io
import json
import math

import pytest
from django.db import transaction
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from registry.io.common import CSV_COLUMNS, MARK_FIELDS, POSITION_MODEL_FIELDS, export_values
from registry.io.export import export_marks_text
from registry.io.marks_csv import parse_marks_csv, write_marks_csv
from registry.io.marks_geojson import parse_marks_geojson, write_marks_geojson
from registry.models import Mark, Position
from registry.services.imports import mark_import


def rich_csv(rt003_frame: str = "6319") -> str:
    """Marks that exercise quoting, unicode, correlations, velocities, statuses and empty positions.

    ``rt003_frame``: RT-003's frame; "7912" puts every position in one frame, as a GeoJSON file holds.
    """
    out = io.StringIO(newline="")
    w = csv.DictWriter(out, fieldnames=CSV_COLUMNS, lineterminator="\n")
    w.writeheader()
    base = {"frame_epsg": "7912", "epoch_yr": "2024.37", "source": "demo campaign 2024"}
    w.writerow(
        {
            **base,
            "code": "RT-001",
            "name": 'Quarry "north" pin, east wall',
            "monument": "pin_concrete",
            "access_directions": "From the mill go 2.4 km north;\nturn right at the gate — 30 m.",
            "notes": "Ünïcode ✓, commas, and\r\nCRLF inside",
            "lat_deg": "45.21345678901234",
            "lon_deg": "-110.6123456789012",
            "h_m": "1523.45678",
            "cov_ee_m2": "1.21e-05",
            "cov_en_m2": "-3.3e-06",
            "cov_eu_m2": "1.1e-06",
            "cov_nn_m2": "1.44e-05",
            "cov_nu_m2": "-2e-06",
            "cov_uu_m2": "6.4e-05",
            "vel_e_m_yr": "-0.0142",
            "vel_n_m_yr": "-0.0031",
            "vel_u_m_yr": "0.0008",
            "vel_sigma_e_m_yr": "0.0004",
            "vel_sigma_n_m_yr": "0.0004",
            "vel_sigma_u_m_yr": "0.0011",
        }
    )
    w.writerow(
        {
            **base,
            "code": "RT-002",
            "status": "destroyed",
            "lat_deg": "45.1",
            "lon_deg": "-110.5",
            "h_m": "1400",
            "sigma_e_mm": "7",
            "sigma_n_mm": "7",
            "sigma_u_mm": "15",
            "monument": "nail",
        }
    )
    w.writerow(
        {
            **base,
            "code": "RT-003",
            "status": "retired",
            "frame_epsg": rt003_frame,
            "epoch_yr": "2010.0",
            "lat_deg": "45.3",
            "lon_deg": "-110.7",
            "h_m": "2100.1",
            "sigma_e_mm": "3.3",
            "sigma_n_mm": "3.3",
            "sigma_u_mm": "8.8",
            "sky_view": "obstructed",
            "stability": "high",
        }
    )
    w.writerow({"code": "RT-004", "name": "No position", "keeper": "Corvid County Survey Office"})
    return out.getvalue()


def registry_state():
    marks = [
        {f: getattr(m, f) for f in (*MARK_FIELDS, "search_lat_deg", "search_lon_deg")}
        for m in Mark.objects.order_by("code")
    ]
    positions = [
        {"mark": p.mark.code, "state": p.state, **{f: getattr(p, f) for f in POSITION_MODEL_FIELDS}}
        for p in Position.objects.select_related("mark").order_by("mark__code", "frame_epsg", "id")
    ]
    return marks, positions


def round_trip(manager, source_text, source_name, fmt):
    """Import ``source_text``, export in ``fmt``; empty the registry; import that export, export again."""
    empty = transaction.savepoint()  # the registry before any import (users and roles only)
    mark_import(actor=manager, content=source_text, filename=source_name)
    first_state, first = registry_state(), export_marks_text(fmt=fmt)
    transaction.savepoint_rollback(empty)  # a second, empty registry
    assert Mark.objects.count() == 0 and Position.objects.count() == 0
    mark_import(actor=manager, content=first, filename=f"export.{fmt}")
    return first, first_state, export_marks_text(fmt=fmt), registry_state()


@pytest.mark.parametrize("fmt", ["csv", "geojson"])
def test_round_trip_is_byte_identical_and_field_equal(manager, fmt):
    # a GeoJSON file holds one frame (issue 10, item 18): its round trip starts from one frame
    source = rich_csv("7912" if fmt == "geojson" else "6319")
    first, first_state, second, second_state = round_trip(manager, source, "rich.csv", fmt)
    assert second == first
    assert second_state == first_state
    marks, positions = first_state
    assert len(marks) == 4 and len(positions) == 3
    assert marks[0]["notes"] == "Ünïcode ✓, commas, and\r\nCRLF inside"
    assert marks[1]["status"] == "destroyed" and positions[1]["state"] == "published"
    assert positions[0]["cov_en_m2"] == -3.3e-06 and positions[0]["vel_e_m_yr"] == -0.0142


def test_csv_and_geojson_carry_the_same_registry(manager):
    """Import the CSV export; its GeoJSON export equals the GeoJSON export of the original registry."""
    empty = transaction.savepoint()
    mark_import(actor=manager, content=rich_csv("7912"), filename="rich.csv")  # one frame, as GeoJSON holds
    csv_text, geojson_text, state = export_marks_text(fmt="csv"), export_marks_text(fmt="geojson"), registry_state()
    transaction.savepoint_rollback(empty)
    mark_import(actor=manager, content=geojson_text, filename="x.geojson")
    assert export_marks_text(fmt="csv") == csv_text and registry_state() == state


# --- The same property without a database, on many random values ----------------------------------

CODE = st.from_regex(r"\A[A-Z0-9][A-Z0-9_.-]{0,31}\Z")
TEXT = st.text(alphabet=st.characters(blacklist_categories=("Cs", "Cc")) | st.sampled_from("\n\r\t"), max_size=60)


def _stripped(max_length):
    return TEXT.map(lambda t: t.strip()[:max_length].strip())


@st.composite
def export_rows(draw):
    values = {name: None for name in CSV_COLUMNS}
    values.update(
        code=draw(CODE),
        name=draw(_stripped(120)),
        monument=draw(st.sampled_from(["disk_rock", "deep_rod", "pillar", "nail", "other"])),
        monument_detail=draw(_stripped(200)),
        stability=draw(st.sampled_from(["high", "moderate", "low", "unknown"])),
        marking=draw(_stripped(120)),
        access_directions=draw(_stripped(2000)),
        sky_view=draw(st.sampled_from(["clear", "partial", "obstructed", "unknown"])),
        keeper=draw(_stripped(120)),
        status=draw(st.sampled_from(["active", "suspect", "retired", "destroyed"])),
        suspect_reason="",
        notes=draw(_stripped(2000)),
    )
    if values["status"] == "suspect":
        values["suspect_since"] = draw(st.dates(dt.date(1900, 1, 1), dt.date(2100, 12, 31))).isoformat()
        values["suspect_reason"] = draw(_stripped(200))
    if draw(st.booleans()):
        finite = {"allow_nan": False, "allow_infinity": False}
        # Covariance L·Lᵀ with a positive diagonal in L: positive definite by construction.
        d = [draw(st.floats(1e-4, 0.1, **finite)) for _ in range(3)]
        o = [draw(st.floats(-0.5, 0.5, **finite)) * min(d) for _ in range(3)]
        chol = [[d[0], 0, 0], [o[0], d[1], 0], [o[1], o[2], d[2]]]
        cov = [[sum(chol[i][k] * chol[j][k] for k in range(3)) for j in range(3)] for i in range(3)]
        values.update(
            frame_epsg=draw(st.sampled_from([7912, 6319, 9989])),
            epoch_yr=draw(st.floats(1900, 2100, **finite)),
            lat_deg=draw(st.floats(-90, 90, **finite)),
            lon_deg=draw(st.floats(-180, 180, **finite)),
            h_m=draw(st.floats(-1000, 10000, **finite)),
            cov_ee_m2=cov[0][0],
            cov_en_m2=cov[0][1],
            cov_eu_m2=cov[0][2],
            cov_nn_m2=cov[1][1],
            cov_nu_m2=cov[1][2],
            cov_uu_m2=cov[2][2],
            source=draw(_stripped(200).filter(bool)),
        )
        if draw(st.booleans()):
            values.update(
                zip(
                    ("vel_e_m_yr", "vel_n_m_yr", "vel_u_m_yr"),
                    [draw(st.floats(-0.1, 0.1, **finite)) for _ in range(3)],
                    strict=True,
                )
            )
        for name, cov_name in (("sigma_e_mm", "cov_ee_m2"), ("sigma_n_mm", "cov_nn_m2"), ("sigma_u_mm", "cov_uu_m2")):
            values[name] = round(math.sqrt(values[cov_name]) * 1000.0, 2)
    return values


def _expected(values):
    mark = {name: values[name] for name in MARK_FIELDS if name != "suspect_since"}
    if values["suspect_since"] is not None:  # written as YYYY-MM-DD, read as a date; blank is "not given"
        mark["suspect_since"] = dt.date.fromisoformat(values["suspect_since"])
    if values["frame_epsg"] is None:
        return mark, None
    return mark, {name: values[name] for name in POSITION_MODEL_FIELDS}


@settings(max_examples=60, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(rows=st.lists(export_rows(), min_size=1, max_size=4, unique_by=lambda r: r["code"]))
def test_writers_and_readers_are_inverse(rows):
    for write, parse in ((write_marks_csv, parse_marks_csv), (write_marks_geojson, parse_marks_geojson)):
        text = write(rows)
        parsed = parse(text)
        assert parsed.errors == []
        got = [(r.mark, r.position) for r in parsed.records]
        assert got == [_expected(v) for v in rows]
        # and once more: writing what was read gives the same text
        again = [{**{n: None for n in CSV_COLUMNS}, **r.mark, **(r.position or {})} for r in parsed.records]
        for v, r in zip(again, parsed.records, strict=True):
            if r.position:
                v.update(
                    {
                        s: round(math.sqrt(r.position[c]) * 1000.0, 2)
                        for s, c in (
                            ("sigma_e_mm", "cov_ee_m2"),
                            ("sigma_n_mm", "cov_nn_m2"),
                            ("sigma_u_mm", "cov_uu_m2"),
                        )
                    }
                )
        assert write(again) == text


def test_export_values_matches_the_models(manager):
    mark_import(actor=manager, content=rich_csv(), filename="rich.csv")
    mark = Mark.objects.get(code="RT-001")
    values = export_values(mark, mark.positions.get())
    assert values["vel_u_m_yr"] == 0.0008 and values["sigma_e_mm"] == 3.48  # √1.21e-05 m² = 3.4785 mm
    assert json.loads(write_marks_geojson([values]))["features"][0]["properties"]["code"] == "RT-001"


def _without_concurrency_columns(text: str) -> list[dict[str, str]]:
    """CSV rows without ``version``/``position_revision`` (they restart at 1 in a new registry)."""
    rows = list(csv.DictReader(io.StringIO(text, newline="")))
    return [{k: v for k, v in row.items() if k not in ("version", "position_revision")} for row in rows]


def _export_rows():
    from registry.io.common import marks_for_export

    return [
        (
            m.code,
            {f: getattr(m, f) for f in MARK_FIELDS},
            p and {f: getattr(p, f) for f in POSITION_MODEL_FIELDS},
        )
        for m, p, _ in marks_for_export()
    ]


@pytest.mark.slow
def test_demo_district_round_trip(manager, settings):
    """The whole demo district, every published frame of every mark (CSV; GeoJSON above).

    load_demo → export E0 → import into an empty registry → export E1 (same content as E0; versions
    and revisions restart) → import E1 into another empty registry → export E2, byte-identical to E1.
    """
    from django.core.management import call_command

    settings.PASSWORD_HASHERS = ["django.contrib.auth.hashers.MD5PasswordHasher"]
    empty = transaction.savepoint()
    call_command("load_demo", stdout=io.StringIO())
    demo_export = export_marks_text(fmt="csv")
    demo_rows = _export_rows()
    n_published = Position.objects.filter(state="published").count()
    with_position = [p for _, _, p in demo_rows if p is not None]
    assert len(with_position) == n_published  # every published position, not one per mark
    per_mark = {}
    for code, _, p in demo_rows:
        per_mark[code] = per_mark.get(code, 0) + (p is not None)
    assert max(per_mark.values()) >= 2 and len(per_mark) == Mark.objects.count()
    transaction.savepoint_rollback(empty)
    assert Mark.objects.count() == 0

    mark_import(actor=manager, content=demo_export, filename="demo.csv")
    first = export_marks_text(fmt="csv")
    assert _without_concurrency_columns(first) == _without_concurrency_columns(demo_export)
    assert _export_rows() == demo_rows
    assert Position.objects.filter(state="published").count() == n_published

    transaction.savepoint_rollback(empty)
    mark_import(actor=manager, content=first, filename="first.csv")
    assert export_marks_text(fmt="csv") == first
    assert _export_rows() == demo_rows
