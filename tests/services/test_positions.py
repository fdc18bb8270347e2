"""Service rules for positions: validation, states, supersession, search location, frozen rows."""

from __future__ import annotations

import pytest
from django.core.exceptions import ValidationError
from django.db import DatabaseError, connection, transaction

from registry.errors import Conflict, NotFound, PermissionDeniedError
from registry.models import AuditEvent, FrozenPositionError, Mark, Position, PositionState
from registry.services.marks import mark_set_status
from registry.services.positions import position_propose, position_publish, position_reject, position_withdraw
from tests.services._data import NAD83_2011_EPSG, make_mark, make_published, position_data

pytestmark = pytest.mark.django_db


def codes_of(exc: ValidationError) -> dict[str, list[str]]:
    return {field: [e.code for e in errors] for field, errors in exc.error_dict.items()}


@pytest.fixture
def mark(manager):
    return make_mark(manager)


# ---- propose --------------------------------------------------------------------------------------


def test_propose_stores_a_proposed_position_and_audits_it(mark, technician):
    position = position_propose(actor=technician, mark_code="QR-101", data=position_data(note="first session"))
    assert position.state == PositionState.PROPOSED and position.created_by == technician
    assert position.cov_en_m2 == 0.0 and position.note == "first session"
    event = AuditEvent.objects.get(action="position_propose")
    assert event.mark_id == mark.pk and event.after["lat_deg"] == pytest.approx(45.2012345678)
    # Proposing does not move the search location.
    assert Mark.objects.get().search_lat_deg is None


def test_propose_accepts_numbers_as_text(mark, technician):
    position = position_propose(
        actor=technician, mark_code="QR-101", data=position_data(lat_deg="45.2", frame_epsg="6319")
    )
    assert position.lat_deg == 45.2 and position.frame_epsg == 6319


@pytest.mark.parametrize(
    ("overrides", "field", "code"),
    [
        ({"lat_deg": 90.000001}, "lat_deg", "lat_out_of_range"),
        ({"lat_deg": -91}, "lat_deg", "lat_out_of_range"),
        ({"lon_deg": 180.5}, "lon_deg", "lon_out_of_range"),
        ({"h_m": 12000}, "h_m", "h_out_of_range"),
        ({"epoch_yr": 1850.0}, "epoch_yr", "epoch_out_of_range"),
        ({"cov_ee_m2": -1e-6}, "cov_ee_m2", "negative_variance"),
        ({"cov_uu_m2": -1e-6}, "cov_uu_m2", "negative_variance"),
        ({"lat_deg": "north"}, "lat_deg", "invalid_number"),
        ({"lat_deg": float("nan")}, "lat_deg", "not_finite"),
        ({"h_m": True}, "h_m", "invalid_number"),
        ({"frame_epsg": 6319.5}, "frame_epsg", "invalid_integer"),
        ({"frame_epsg": 4326}, "frame_epsg", "frame_not_geographic_3d"),  # WGS 84 2D
        ({"frame_epsg": 6341}, "frame_epsg", "frame_not_geographic_3d"),  # a projected CRS (UTM 12N)
        ({"frame_epsg": 999999}, "frame_epsg", "frame_not_geographic_3d"),  # no such EPSG code
        ({"source": ""}, "source", "required"),
        ({"vel_e_m_yr": 0.001}, "vel_e_m_yr", "velocity_incomplete"),
        ({"vel_sigma_e_m_yr": 0.001}, "vel_sigma_e_m_yr", "velocity_sigma_without_velocity"),
        (
            {"vel_e_m_yr": 0.01, "vel_n_m_yr": 0.0, "vel_u_m_yr": 0.0, "vel_sigma_n_m_yr": -0.001},
            "vel_sigma_n_m_yr",
            "negative_sigma",
        ),
        # |ρ| > 1 between east and north: not a covariance matrix.
        ({"cov_en_m2": 0.005 * 0.005 * 1.5}, "cov_ee_m2", "covariance_not_positive_definite"),
        ({"cov_ee_m2": 0.0, "cov_nn_m2": 0.0, "cov_uu_m2": 0.0}, "cov_ee_m2", "covariance_zero"),
        ({"cov_uu_m2": 1.0e6}, "cov_uu_m2", "variance_too_large"),  # σ = 1 km: a unit mistake
        ({"cov_uu_m2": 1.0e4 * (1 + 1e-12)}, "cov_uu_m2", "variance_too_large"),  # just above σ = 100 m
        ({"cov_uu_m2": 0.0}, "cov_uu_m2", "zero_variance"),  # exported positions must re-import
        ({"vel_e_m_yr": 1.5, "vel_n_m_yr": 0.0, "vel_u_m_yr": 0.0}, "vel_e_m_yr", "velocity_too_large"),
        # rank-2 matrix (ρ_en = 1): semi-definite only
        ({"cov_en_m2": 0.005 * 0.005}, "cov_ee_m2", "covariance_not_positive_definite"),
        ({"source": "a\x00b"}, "source", "null_characters_not_allowed"),
        ({"note": ["not", "text"]}, "note", "invalid_type"),
        ({"lat": 45.0}, "lat", "unknown_field"),
    ],
)
def test_propose_rejects_bad_input_with_a_code(mark, technician, overrides, field, code):
    data = position_data(**overrides)
    with pytest.raises(ValidationError) as info:
        position_propose(actor=technician, mark_code="QR-101", data=data)
    assert code in codes_of(info.value)[field]
    assert not Position.objects.exists()
    assert not AuditEvent.objects.filter(action="position_propose").exists()


def test_propose_reports_every_missing_field_at_once(mark, technician):
    with pytest.raises(ValidationError) as info:
        position_propose(actor=technician, mark_code="QR-101", data={"source": "x"})
    codes = codes_of(info.value)
    for field in ("frame_epsg", "epoch_yr", "lat_deg", "lon_deg", "h_m", "cov_ee_m2", "cov_nn_m2", "cov_uu_m2"):
        assert codes[field] == ["required"]


def test_propose_roles(mark, viewer, signatory, make_user):
    for user in (viewer, signatory):
        with pytest.raises(PermissionDeniedError):
            position_propose(actor=user, mark_code="QR-101", data=position_data())
    with pytest.raises(NotFound):
        position_propose(actor=make_user("nils", None), mark_code="QR-101", data=position_data())
    assert not Position.objects.exists()


def test_propose_on_a_destroyed_mark_is_refused(mark, manager, technician):
    mark_set_status(actor=manager, code="QR-101", status="destroyed", expected_version=1, note="Bulldozed (invented)")
    with pytest.raises(Conflict) as info:
        position_propose(actor=technician, mark_code="QR-101", data=position_data())
    assert info.value.code == "mark_destroyed"
    assert info.value.message == "Mark QR-101 is recorded as destroyed; a destroyed mark gets no new positions."
    assert not Position.objects.exists()


# ---- publish, supersede, search location -------------------------------------------------------


def test_publish_sets_state_decider_and_search_location(mark, manager, technician):
    position = make_published(manager, technician)
    assert position.state == PositionState.PUBLISHED
    assert position.decided_by == manager and position.decided_at is not None
    stored = Mark.objects.get()
    assert (stored.search_lat_deg, stored.search_lon_deg) == (45.2012345678, -110.6023456789)
    assert stored.version == 1  # the search location is not an edit of the mark's description
    event = AuditEvent.objects.get(action="position_publish")
    assert event.after["search_lat_deg"] == 45.2012345678 and event.before["search_lat_deg"] is None


def test_publishing_again_in_the_same_frame_supersedes_in_one_step(mark, manager, technician):
    first = make_published(manager, technician)
    second = make_published(
        manager,
        technician,
        lat_deg=45.2012346,
        epoch_yr=2024.5,
        publish_note="invented data: published regardless of the movement check",
    )
    first.refresh_from_db()
    assert first.state == PositionState.SUPERSEDED
    assert first.superseded_by_id == second.pk
    assert first.superseded_at == second.decided_at
    assert Position.objects.filter(state=PositionState.PUBLISHED).get() == second
    assert Mark.objects.get().search_lat_deg == 45.2012346
    supersede = AuditEvent.objects.get(action="position_supersede")
    assert supersede.object_id == str(first.pk) and supersede.after["superseded_by_id"] == second.pk


def test_another_frame_does_not_supersede_and_the_search_location_follows_the_latest(mark, manager, technician):
    itrf = make_published(manager, technician)
    nad83 = make_published(
        manager,
        technician,
        frame_epsg=NAD83_2011_EPSG,
        lat_deg=45.20122,
        lon_deg=-110.60233,
        publish_note="invented data: published regardless of the movement check",
    )
    itrf.refresh_from_db()
    assert itrf.state == nad83.state == PositionState.PUBLISHED
    assert Mark.objects.values_list("search_lat_deg", "search_lon_deg").get() == (45.20122, -110.60233)


def test_withdrawing_the_driving_position_falls_back_then_clears(mark, manager, technician):
    itrf = make_published(manager, technician)
    nad83 = make_published(
        manager,
        technician,
        frame_epsg=NAD83_2011_EPSG,
        lat_deg=45.20122,
        lon_deg=-110.60233,
        publish_note="invented data: published regardless of the movement check",
    )
    with pytest.raises(ValidationError) as info:
        position_withdraw(actor=manager, position_id=nad83.pk, note="")
    assert codes_of(info.value) == {"note": ["note_required"]}
    position_withdraw(actor=manager, position_id=nad83.pk, note="Wrong antenna height (invented)")
    assert Mark.objects.values_list("search_lat_deg", "search_lon_deg").get() == (45.2012345678, -110.6023456789)
    position_withdraw(actor=manager, position_id=itrf.pk, note="Blunder (invented)")
    assert Mark.objects.values_list("search_lat_deg", "search_lon_deg").get() == (None, None)
    itrf.refresh_from_db()
    assert itrf.state == PositionState.WITHDRAWN


def test_state_rules(mark, manager, technician):
    proposed = position_propose(actor=technician, mark_code="QR-101", data=position_data())
    with pytest.raises(Conflict) as info:
        position_withdraw(actor=manager, position_id=proposed.pk, note="not yet published")
    assert info.value.code == "invalid_state"
    with pytest.raises(ValidationError):
        position_reject(actor=manager, position_id=proposed.pk, note=" ")
    rejected = position_reject(actor=manager, position_id=proposed.pk, note="Float solution only (invented)")
    assert rejected.state == PositionState.REJECTED
    for action in (position_publish,):
        with pytest.raises(Conflict):
            action(actor=manager, position_id=proposed.pk)
    published = make_published(manager, technician)
    with pytest.raises(Conflict):
        position_publish(actor=manager, position_id=published.pk)
    with pytest.raises(Conflict):
        position_reject(actor=manager, position_id=published.pk, note="too late")


def test_decisions_need_the_manager_role(mark, manager, technician, viewer):
    proposed = position_propose(actor=technician, mark_code="QR-101", data=position_data())
    for user in (technician, viewer):
        with pytest.raises(PermissionDeniedError):
            position_publish(actor=user, position_id=proposed.pk)
        with pytest.raises(PermissionDeniedError):
            position_reject(actor=user, position_id=proposed.pk, note="x")
    with pytest.raises(NotFound):
        position_publish(actor=manager, position_id=987654)
    with pytest.raises(NotFound):
        position_publish(actor=manager, position_id="12; DROP TABLE")
    proposed.refresh_from_db()
    assert proposed.state == PositionState.PROPOSED


# ---- published and superseded positions never change ---------------------------------------------


def test_orm_guard_refuses_to_edit_a_published_position(mark, manager, technician):
    published = make_published(manager, technician)
    published.lat_deg = 45.3
    with pytest.raises(FrozenPositionError):
        published.save()
    assert Position.objects.get(pk=published.pk).lat_deg == 45.2012345678


@pytest.mark.parametrize("state", ["published", "superseded"])
def test_database_trigger_refuses_raw_sql_updates(mark, manager, technician, state):
    first = make_published(manager, technician)
    if state == "superseded":
        make_published(
            manager,
            technician,
            epoch_yr=2024.0,
            publish_note="invented data: published regardless of the movement check",
        )
    table = Position._meta.db_table
    with pytest.raises(DatabaseError):
        with transaction.atomic(), connection.cursor() as cursor:
            cursor.execute(f"UPDATE {table} SET lat_deg = lat_deg + 0.001 WHERE id = %s", [first.pk])
    first.refresh_from_db()
    assert first.lat_deg == 45.2012345678 and first.state == state


def test_raw_sql_may_still_edit_a_proposed_position(mark, technician):
    """The trigger is specific: a proposed position is still a draft (control for the test above)."""
    proposed = position_propose(actor=technician, mark_code="QR-101", data=position_data())
    with connection.cursor() as cursor:
        cursor.execute(f"UPDATE {Position._meta.db_table} SET h_m = 1500.0 WHERE id = %s", [proposed.pk])
    proposed.refresh_from_db()
    assert proposed.h_m == 1500.0


# ---- who decided, when, and what the audit trail keeps (the decisions of the module docstring) ------


def test_reject_records_the_decider_the_time_and_the_audit_row(mark, manager, technician):
    from django.utils import timezone

    proposed = position_propose(actor=technician, mark_code="QR-101", data=position_data())
    with pytest.raises(ValidationError) as info:
        position_reject(actor=manager, position_id=proposed.pk, note="")
    assert info.value.error_dict["note"][0].message == "Give the reason for the rejection."
    before = timezone.now()
    position_reject(actor=manager, position_id=proposed.pk, note="Float solution only (invented)")
    proposed.refresh_from_db()
    assert proposed.state == PositionState.REJECTED
    assert proposed.decided_by == manager
    assert before <= proposed.decided_at <= timezone.now()
    event = AuditEvent.objects.get(action="position_reject")
    assert (event.before, event.after) == ({"state": "proposed"}, {"state": "rejected"})
    assert event.note == "Float solution only (invented)" and event.object_id == str(proposed.pk)


def test_withdraw_records_the_decider_the_time_and_the_audit_row(mark, manager, technician):
    from django.utils import timezone

    published = make_published(manager, technician)
    with pytest.raises(ValidationError) as info:
        position_withdraw(actor=manager, position_id=published.pk, note="  ")
    assert info.value.error_dict["note"][0].message == "Give the reason for the withdrawal."
    before = timezone.now()
    position_withdraw(actor=manager, position_id=published.pk, note="Wrong antenna height (invented)")
    published.refresh_from_db()
    assert published.decided_by == manager
    assert before <= published.decided_at <= timezone.now()
    event = AuditEvent.objects.get(action="position_withdraw")
    assert event.before == {"state": "published", "search_lat_deg": 45.2012345678, "search_lon_deg": -110.6023456789}
    assert event.after == {"state": "withdrawn", "search_lat_deg": None, "search_lon_deg": None}
    assert event.note == "Wrong antenna height (invented)" and event.mark_id == mark.pk


def test_a_decision_in_the_wrong_state_says_what_was_allowed(mark, manager, technician):
    proposed = position_propose(actor=technician, mark_code="QR-101", data=position_data())
    with pytest.raises(Conflict) as info:
        position_withdraw(actor=manager, position_id=proposed.pk, note="not yet published")
    assert info.value.message == (f"Position {proposed.pk} is proposed; only a published position can be withdrawn.")
    assert info.value.details == {"state": "proposed", "allowed": ["published"]}


def test_search_location_follows_the_most_recently_published_not_the_newest_row(mark, manager, technician):
    # Module docstring: the search location follows the most recently *published* position of any frame.
    # The NAD83 proposal is the newer row but is published first; the older ITRF row published after it
    # must then drive the search location.
    itrf = position_propose(actor=technician, mark_code="QR-101", data=position_data())
    nad83 = position_propose(
        actor=technician,
        mark_code="QR-101",
        data=position_data(frame_epsg=NAD83_2011_EPSG, lat_deg=45.20122, lon_deg=-110.60233),
    )
    assert nad83.pk > itrf.pk
    position_publish(actor=manager, position_id=nad83.pk, note="invented data")
    # the manager looked at the comparison with the NAD83 position just published
    position_publish(actor=manager, position_id=itrf.pk, note="invented data", compared_with=nad83.pk)
    assert Mark.objects.values_list("search_lat_deg", "search_lon_deg").get() == (45.2012345678, -110.6023456789)


def test_publish_refuses_a_compared_with_that_is_not_a_number(mark, manager, technician):
    proposed = position_propose(actor=technician, mark_code="QR-101", data=position_data())
    with pytest.raises(ValidationError) as info:
        position_publish(actor=manager, position_id=proposed.pk, compared_with="the old one")
    assert codes_of(info.value) == {"compared_with": ["invalid_integer"]}


def test_publish_after_the_mark_was_destroyed_is_refused_in_words(mark, manager, technician):
    proposed = position_propose(actor=technician, mark_code="QR-101", data=position_data())
    mark_set_status(actor=manager, code="QR-101", status="destroyed", expected_version=1, note="Bulldozed (invented)")
    with pytest.raises(Conflict) as info:
        position_publish(actor=manager, position_id=proposed.pk)
    assert info.value.code == "mark_destroyed"
    assert info.value.message == "Mark QR-101 is recorded as destroyed; its positions cannot be published."
    proposed.refresh_from_db()
    assert proposed.state == PositionState.PROPOSED


def test_publish_refuses_when_the_published_position_changed_since_the_proposal(mark, manager, technician):
    first = position_propose(actor=technician, mark_code="QR-101", data=position_data())  # compared with none
    other = make_published(manager, technician)
    with pytest.raises(Conflict) as info:
        position_publish(actor=manager, position_id=first.pk)
    assert info.value.code == "compared_with_changed"
    assert info.value.details == {"compared_with": None, "published_now": other.pk}
    assert info.value.message == (
        f"Position {first.pk} was compared with no published position, but the published position of QR-101 "
        f"is now position {other.pk}. Someone decided in between: look at the new comparison and decide again."
    )


def test_publishing_against_possible_movement_needs_a_reason(mark, manager, technician):
    make_published(manager, technician)
    # 0.001° of latitude is about 111 m (any geodesy text): far beyond σ = 5 mm, so possible movement
    moved = position_propose(actor=technician, mark_code="QR-101", data=position_data(lat_deg=45.2022345678))
    with pytest.raises(ValidationError) as info:
        position_publish(actor=manager, position_id=moved.pk)
    [error] = info.value.error_dict["note"]
    assert error.code == "movement_note_required"
    assert error.message == (
        "The movement check shows possible movement against the published position; give the reason "
        "for publishing anyway."
    )
    moved.refresh_from_db()
    assert moved.state == PositionState.PROPOSED


def test_publishing_answers_the_suspicion_and_the_audit_row_says_so(mark, manager, technician):
    # services.suspect: a newly published position makes a suspect mark active again.
    make_published(manager, technician)
    moved = position_propose(actor=technician, mark_code="QR-101", data=position_data(lat_deg=45.2022345678))
    suspect = Mark.objects.get()
    assert suspect.status == "suspect"
    position_publish(actor=manager, position_id=moved.pk, note="The mark was reset (invented)")
    active = Mark.objects.get()
    assert (active.status, active.suspect_reason, active.suspect_since) == ("active", "", None)
    assert active.version == suspect.version + 1
    event = AuditEvent.objects.filter(action="position_publish").latest("seq")
    assert (event.before["mark_status"], event.after["mark_status"]) == ("suspect", "active")
    assert event.after["mark_version"] == suspect.version + 1
