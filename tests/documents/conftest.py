"""Fixtures for documents: a mark with a published position and history, the office's authority, a
signatory with a licence and a certificate, and helpers that walk a document to "signed".

All data is invented (the demo district's corner of the map, 45.2° N 110.6° W).
"""

from __future__ import annotations

import datetime as dt

import pytest

from registry.models import Finding, Mark, Occupation, Position, PositionState, Visit


@pytest.fixture(autouse=True)
def _fast_password_hashing(settings):
    """Account passwords hashed with MD5 in these tests only (speed); signing still checks the password."""
    settings.PASSWORD_HASHERS = ["django.contrib.auth.hashers.MD5PasswordHasher"]


SIGNATORY_PASSWORD = "pw-sina-123!"  # conftest._make_user: "pw-" + username + "-123!"

#: The test mark's published position: NAD83(2011), correlated east/north covariance (m²).
POSITION = {
    "frame_epsg": 6319,
    "epoch_yr": 2010.0,
    "lat_deg": 45.217808215,
    "lon_deg": -110.583817838,
    "h_m": 1405.863,
    "cov_ee_m2": 0.0081**2,
    "cov_en_m2": 0.3 * 0.0081 * 0.0105,
    "cov_eu_m2": 0.0,
    "cov_nn_m2": 0.0105**2,
    "cov_nu_m2": 0.0,
    "cov_uu_m2": 0.0124**2,
}


def make_mark(code: str = "CR-100", *, lat: float | None = None, lon: float | None = None, **fields) -> Mark:
    lat = POSITION["lat_deg"] if lat is None else lat
    lon = POSITION["lon_deg"] if lon is None else lon
    mark = Mark.objects.create(
        code=code,
        name=fields.pop("name", "Ferry Rd & Third Ave"),
        monument="disk_concrete",
        monument_detail="bronze disk in a concrete post",
        stability="moderate",
        marking=f"{code} 2004",
        access_directions="From the courthouse go 2.4 km north-east; the mark is 4 m south-east of the hydrant.",
        sky_view="clear",
        keeper="Invented County Survey Office",
        search_lat_deg=lat,
        search_lon_deg=lon,
        **fields,
    )
    Position.objects.create(
        mark=mark,
        state=PositionState.PUBLISHED,
        source="invented adjustment",
        decided_at=dt.datetime(2012, 3, 1, tzinfo=dt.UTC),
        **{**POSITION, "lat_deg": lat, "lon_deg": lon},
    )
    return mark


@pytest.fixture
def mark(db) -> Mark:
    m = make_mark()
    make_mark("CR-101", lat=POSITION["lat_deg"] - 0.005, lon=POSITION["lon_deg"] + 0.004)
    Visit.objects.create(mark=m, visited_on=dt.date(2025, 5, 2), finding=Finding.INTACT, visitor="T. Farrow")
    Occupation.objects.create(
        mark=m,
        method="static_gnss",
        start_utc=dt.datetime(2023, 10, 14, 15, tzinfo=dt.UTC),
        end_utc=dt.datetime(2023, 10, 14, 19, tzinfo=dt.UTC),
        receiver="receiver R-04",
        antenna="antenna A-04",
        antenna_height_arp_m=1.379,
        observer="L. Marchetti",
    )
    return m


@pytest.fixture
def office(admin_user_role, signatory):
    """The office's authority, the signatory's licence and certificate."""
    from registry.services.certificates import certificate_issue, office_ca_init, signatory_set_licence

    ca = office_ca_init(actor=admin_user_role, name="Test office authority", organisation="Invented office")
    signatory.first_name, signatory.last_name = "Sina", "Okonkwo-Test"
    signatory.save()
    signatory_set_licence(
        actor=admin_user_role, username=signatory.username, licence_number="LS-9042", jurisdiction="Invented Board"
    )
    cert = certificate_issue(actor=admin_user_role, username=signatory.username)
    return {"ca": ca, "cert": cert, "admin": admin_user_role, "signatory": signatory}


@pytest.fixture
def signed_sheet(mark, office, technician, manager):
    """A sheet of ``mark`` prepared by the technician, checked by the manager, signed by the signatory."""
    from registry.services.documents import document_build_sheet, document_check, document_sign

    doc = document_build_sheet(actor=technician, mark_code=mark.code)
    document_check(actor=manager, code=doc.code)
    return document_sign(actor=office["signatory"], code=doc.code, password=SIGNATORY_PASSWORD)
