"""One set of position rules: what the service publishes, the export writes and the importer takes back.

Positions are published through the service at the edges of ``services.position_rules`` (σ = 100 m
exactly, a 1 µm σ whose rounded σ column reads 0.00 mm, a correlation of 0.999999, |v| = 1 m/yr),
exported as CSV and GeoJSON, the registry emptied (savepoint rollback) and the file imported again:
the positions must come back equal. Just beyond each edge, the service, the importer and the database
constraint all refuse. Runs on SQLite and PostgreSQL alike (``DATABASE_URL``).
"""

from __future__ import annotations

import pytest
from django.core.exceptions import ValidationError
from django.db import IntegrityError, transaction

from registry.io.export import export_marks_text
from registry.models import Mark, Position, PositionState
from registry.services import position_rules as rules
from registry.services.imports import ImportRejected, mark_import
from registry.services.marks import mark_create
from registry.services.positions import position_propose, position_publish
from tests.io.test_roundtrip import registry_state

pytestmark = pytest.mark.django_db

S = 0.005**2  # (5 mm)²
BOUNDARY_CASES = {
    # σ exactly at the bound on every axis
    "BC-001": {
        "cov_ee_m2": rules.VARIANCE_MAX_M2,
        "cov_nn_m2": rules.VARIANCE_MAX_M2,
        "cov_uu_m2": rules.VARIANCE_MAX_M2,
    },
    # a 1 µm σ: its σ column rounds to 0.00 mm, the covariance is authoritative
    "BC-002": {"cov_ee_m2": 1e-12, "cov_nn_m2": 1e-12, "cov_uu_m2": 1e-12},
    # almost singular: ρ_en = 0.999999, still positive definite
    "BC-003": {"cov_ee_m2": S, "cov_nn_m2": S, "cov_uu_m2": 4 * S, "cov_en_m2": 0.999999 * S},
    # negative correlations on every pair, and the largest velocity allowed
    "BC-004": {
        "cov_ee_m2": S,
        "cov_nn_m2": S,
        "cov_uu_m2": 4 * S,
        "cov_en_m2": -0.5 * S,
        "cov_eu_m2": -0.9 * S,
        "cov_nu_m2": -0.2 * S,
        "vel_e_m_yr": rules.VELOCITY_MAX_M_YR,
        "vel_n_m_yr": -rules.VELOCITY_MAX_M_YR,
        "vel_u_m_yr": 0.0,
        "vel_sigma_e_m_yr": rules.VELOCITY_MAX_M_YR,
        "vel_sigma_n_m_yr": 0.0,
        "vel_sigma_u_m_yr": 0.001,
    },
}


def _publish(manager, code: str, extra: dict) -> Position:
    mark_create(actor=manager, data={"code": code, "name": f"Boundary {code}"})
    data = {
        "frame_epsg": 7912,
        "epoch_yr": 2024.5,
        "lat_deg": 45.2,
        "lon_deg": -110.6,
        "h_m": 1500.0,
        "source": "boundary case (invented)",
        **extra,
    }
    position = position_propose(actor=manager, mark_code=code, data=data)
    return position_publish(actor=manager, position_id=position.pk)


@pytest.mark.parametrize("fmt", ["csv", "geojson"])
def test_boundary_covariances_published_by_the_service_re_import(manager, fmt):
    empty = transaction.savepoint()
    for code, extra in BOUNDARY_CASES.items():
        _publish(manager, code, extra)
    first_state, exported = registry_state(), export_marks_text(fmt=fmt)
    transaction.savepoint_rollback(empty)
    assert Mark.objects.count() == 0
    summary = mark_import(actor=manager, content=exported, filename=f"boundary.{fmt}")
    assert summary.positions_published == len(BOUNDARY_CASES)
    second_state = registry_state()
    assert second_state[1] == first_state[1]  # every position field, exactly
    assert {p["state"] for p in second_state[1]} == {PositionState.PUBLISHED}
    assert export_marks_text(fmt=fmt) == exported


@pytest.mark.parametrize(
    ("extra", "code"),
    [
        ({"cov_ee_m2": rules.VARIANCE_MAX_M2 * (1 + 1e-12), "cov_nn_m2": S, "cov_uu_m2": S}, "variance_too_large"),
        ({"cov_ee_m2": S, "cov_nn_m2": S, "cov_uu_m2": 0.0}, "zero_variance"),
        ({"cov_ee_m2": S, "cov_nn_m2": S, "cov_uu_m2": S, "cov_en_m2": S}, "covariance_not_positive_definite"),
        (
            {"cov_ee_m2": S, "cov_nn_m2": S, "cov_uu_m2": S, "vel_e_m_yr": 1.000001, "vel_n_m_yr": 0, "vel_u_m_yr": 0},
            "velocity_too_large",
        ),
    ],
)
def test_just_beyond_the_edge_the_service_and_the_importer_both_refuse(manager, extra, code):
    mark_create(actor=manager, data={"code": "BC-009", "name": "Beyond"})
    base = {"frame_epsg": 7912, "epoch_yr": 2024.5, "lat_deg": 45.2, "lon_deg": -110.6, "h_m": 1500.0}
    with pytest.raises(ValidationError) as service_refusal:
        position_propose(actor=manager, mark_code="BC-009", data={**base, "source": "x", **extra})
    assert code in {e.code for errors in service_refusal.value.error_dict.values() for e in errors}

    columns = ["code", *base, *extra, "source"]
    row = ["BC-010", *(repr(float(v)) for v in base.values()), *(repr(float(v)) for v in extra.values()), "x"]
    row[1] = "7912"
    text = ",".join(columns) + "\n" + ",".join(row) + "\n"
    with pytest.raises(ImportRejected) as import_refusal:
        mark_import(actor=manager, content=text, filename="beyond.csv")
    assert code in {e.code for e in import_refusal.value.errors}
    assert not Position.objects.exists()


def test_the_database_refuses_a_zero_variance_too(manager):
    """The constraint agrees with the rules: a row written past the service still cannot hold σ = 0."""
    mark = mark_create(actor=manager, data={"code": "BC-011", "name": "Constraint"})
    row = Position(
        mark=mark,
        frame_epsg=7912,
        epoch_yr=2024.5,
        lat_deg=45.2,
        lon_deg=-110.6,
        h_m=1500.0,
        cov_ee_m2=S,
        cov_nn_m2=S,
        cov_uu_m2=0.0,
        source="x",
        state=PositionState.PROPOSED,
        created_by=manager,
    )
    with pytest.raises(IntegrityError), transaction.atomic():
        row.save(force_insert=True)
