"""Job services: create and edit with optimistic concurrency, validation codes, roles, audit."""

from __future__ import annotations

import pytest
from django.core.exceptions import ValidationError

from registry.errors import Conflict, NotFound, PermissionDeniedError
from registry.models import AuditEvent, Job
from registry.services.jobs import job_create, job_update

SQUARE = {
    "type": "Polygon",
    "coordinates": [[[-110.61, 45.19], [-110.59, 45.19], [-110.59, 45.21], [-110.61, 45.21], [-110.61, 45.19]]],
}


def job_data(**over):
    data = {
        "code": "J-0001",
        "name": "Willow Flat subdivision, phase 1",  # invented
        "client": "Example Land Co.",
        "site_geojson": SQUARE,
        "frame_epsg": 6319,
        "epoch_yr": 2025.5,
        "tol_h_mm": 20,
        "tol_v_mm": "30",
    }
    data.update(over)
    return data


def codes(exc: ValidationError) -> dict[str, list[str]]:
    return {k: [e.code for e in v] for k, v in exc.error_dict.items()}


@pytest.mark.django_db
def test_create_with_documented_defaults_and_audit(manager, settings):
    settings.REGISTRY = {**settings.REGISTRY, "MAX_BASELINE_M": 8000.0}
    job = job_create(actor=manager, data=job_data())
    assert job.version == 1 and job.created_by == manager
    assert job.tol_v_mm == 30.0
    # Common-practice defaults (README "search-and-screening") and settings.REGISTRY defaults.
    assert (job.rtk_h_fixed_mm, job.rtk_h_ppm, job.rtk_v_fixed_mm, job.rtk_v_ppm) == (8.0, 1.0, 15.0, 1.0)
    assert (job.rtk_combination, job.rtk_h_meaning) == ("additive", "per_axis")
    assert (job.setup_h_mm, job.setup_v_mm, job.assumed_rate_mm_yr, job.recovery_years) == (2.0, 3.0, 2.0, 10.0)
    assert job.max_baseline_m == 8000.0
    event = AuditEvent.objects.get(action="job_create")
    assert event.actor == manager and event.object_id == str(job.pk) and event.after["code"] == "J-0001"


@pytest.mark.django_db
def test_feature_and_text_site_are_stored_as_geometry(manager):
    import json

    job = job_create(
        actor=manager,
        data=job_data(
            site_geojson=json.dumps(
                {"type": "Feature", "properties": {}, "geometry": {"type": "Point", "coordinates": [-110.6, 45.2]}}
            )
        ),
    )
    assert job.site_geojson == {"type": "Point", "coordinates": [-110.6, 45.2]}


@pytest.mark.django_db
@pytest.mark.parametrize(
    "over, field, code",
    [
        ({"code": "j 1"}, "code", "invalid_code"),
        ({"code": ""}, "code", "required"),
        ({"name": ""}, "name", "required"),
        ({"site_geojson": {"type": "LineString", "coordinates": []}}, "site_geojson", "unsupported_geometry"),
        ({"site_geojson": "{oops"}, "site_geojson", "invalid_json"),
        ({"frame_epsg": 4326}, "frame_epsg", "invalid_frame"),  # 2D CRS: a frame must be geographic 3D
        ({"frame_epsg": "six"}, "frame_epsg", "invalid_integer"),
        ({"grid_epsg": 6319}, "grid_epsg", "invalid_grid"),  # not projected
        ({"epoch_yr": 1850}, "epoch_yr", "out_of_range"),
        ({"tol_h_mm": 0}, "tol_h_mm", "out_of_range"),
        ({"tol_v_mm": "abc"}, "tol_v_mm", "invalid_number"),
        ({"rtk_h_ppm": -1}, "rtk_h_ppm", "out_of_range"),
        ({"max_baseline_m": 0}, "max_baseline_m", "out_of_range"),
        ({"rtk_combination": "max"}, "rtk_combination", "invalid_choice"),
        ({"colour": "red"}, "colour", "unknown_field"),
        ({"grid_spacing_m": 0.5}, "grid_spacing_m", "grid_too_fine"),
    ],
)
def test_create_refuses_bad_input_with_codes_and_changes_nothing(manager, over, field, code):
    data = job_data(**over)
    if over.get("name") == "":
        data["name"] = ""
    with pytest.raises(ValidationError) as info:
        job_create(actor=manager, data=data)
    assert code in codes(info.value).get(field, []), codes(info.value)
    assert Job.objects.count() == 0 and AuditEvent.objects.count() == 0


@pytest.mark.django_db
def test_create_missing_required_fields(manager):
    with pytest.raises(ValidationError) as info:
        job_create(actor=manager, data={"code": "J-9"})
    got = codes(info.value)
    for f in ("name", "site_geojson", "frame_epsg", "epoch_yr", "tol_h_mm", "tol_v_mm"):
        assert got[f] == ["required"]


@pytest.mark.django_db
def test_duplicate_code(manager):
    job_create(actor=manager, data=job_data())
    with pytest.raises(ValidationError) as info:
        job_create(actor=manager, data=job_data(name="other"))
    assert codes(info.value) == {"code": ["unique"]}


@pytest.mark.django_db
@pytest.mark.parametrize("who", ["viewer", "signatory"])
def test_only_technicians_and_managers_plan_jobs(request, who):
    user = request.getfixturevalue(who)
    with pytest.raises(PermissionDeniedError):
        job_create(actor=user, data=job_data())
    assert Job.objects.count() == 0


@pytest.mark.django_db
@pytest.mark.parametrize("who", ["technician", "manager"])
def test_party_chiefs_and_managers_create_and_edit_jobs(request, who):
    user = request.getfixturevalue(who)
    job = job_create(actor=user, data=job_data())
    assert job_update(actor=user, code=job.code, expected_version=1, changes={"notes": "by " + who}).version == 2


@pytest.mark.django_db
def test_update_bumps_version_and_audits(manager):
    job = job_create(actor=manager, data=job_data())
    updated = job_update(actor=manager, code="J-0001", expected_version=1, changes={"tol_h_mm": 25, "notes": "tighter"})
    assert updated.version == 2 and updated.tol_h_mm == 25.0
    event = AuditEvent.objects.get(action="job_update")
    assert event.before == {"tol_h_mm": 20.0, "notes": "", "version": 1}
    assert event.after == {"tol_h_mm": 25.0, "notes": "tighter", "version": 2}
    # Same values again at the current version: nothing changes, no audit row.
    same = job_update(actor=manager, code="J-0001", expected_version=2, changes={"tol_h_mm": 25})
    assert same.version == 2 and AuditEvent.objects.filter(action="job_update").count() == 1
    assert job.pk == same.pk


@pytest.mark.django_db
def test_stale_version_conflict_keeps_both_sides(manager, make_user):
    other = make_user("omar", "manager")
    job_create(actor=manager, data=job_data())
    job_update(actor=other, code="J-0001", expected_version=1, changes={"tol_v_mm": 40})
    with pytest.raises(Conflict) as info:
        job_update(actor=manager, code="J-0001", expected_version=1, changes={"tol_v_mm": 35, "name": "renamed"})
    err = info.value
    assert err.code == "stale_version" and err.status == 409
    assert err.details["tol_v_mm"] == {"yours": 35.0, "theirs": 40.0}
    assert err.details["name"]["yours"] == "renamed"
    assert err.details["version"] == {"yours": 1, "theirs": 2}
    job = Job.objects.get(code="J-0001")
    assert (job.tol_v_mm, job.name, job.version) == (40.0, "Willow Flat subdivision, phase 1", 2)
    assert AuditEvent.objects.filter(action="job_update_refused", actor=manager).count() == 1


@pytest.mark.django_db
def test_update_refusals(manager, viewer, make_user):
    job_create(actor=manager, data=job_data())
    nobody = make_user("nobody", None)
    with pytest.raises(NotFound):
        job_update(actor=nobody, code="J-0001", expected_version=1, changes={"name": "x"})
    with pytest.raises(NotFound):
        job_update(actor=manager, code="J-404", expected_version=1, changes={"name": "x"})
    with pytest.raises(PermissionDeniedError):
        job_update(actor=viewer, code="J-0001", expected_version=1, changes={"name": "x"})
    for version, code in ((None, "version_required"), ("x", "invalid_version"), (0, "invalid_version")):
        with pytest.raises(ValidationError) as info:
            job_update(actor=manager, code="J-0001", expected_version=version, changes={"name": "x"})
        assert codes(info.value) == {"version": [code]}
    with pytest.raises(ValidationError) as info:
        job_update(actor=manager, code="J-0001", expected_version=1, changes={})
    assert info.value.code == "no_changes"
    with pytest.raises(ValidationError) as info:
        job_update(actor=manager, code="J-0001", expected_version=1, changes={"code": "J-2"})
    assert codes(info.value) == {"code": ["not_editable"]}
    with pytest.raises(ValidationError) as info:
        job_update(actor=manager, code="J-0001", expected_version=1, changes={"site_geojson": {"type": "Point"}})
    assert codes(info.value) == {"site_geojson": ["invalid_position"]}
    assert Job.objects.get(code="J-0001").version == 1
