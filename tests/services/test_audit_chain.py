"""The audit trail's hash chain, the TRUNCATE guard and the runtime role (issue 11, "Edges" 8).

Check value: SHA-256 of the empty string = e3b0c442...b855 (FIPS 180-2 / NIST example values,
from memory; recomputed here with hashlib only to show the hex form the chain stores).
"""

from __future__ import annotations

import hashlib
import io
import json
import threading

import numpy as np
import pytest
from django.core.management import call_command
from django.db import DatabaseError, connection, transaction
from hypothesis import given, settings
from hypothesis import strategies as st

from registry.dbroles import grant_runtime_role
from registry.models import AuditEvent
from registry.models.audit import GENESIS_HASH, chain_payload, row_hash_of
from registry.selectors.audit import audit_verify_chain
from registry.services.audit import audit_record
from tests.services._data import make_mark

pytestmark = pytest.mark.django_db
SHA256_EMPTY = "e3b0c44298fc1c149afbf4c8996fb92427ae41e4649b934ca495991b7852b855"  # FIPS 180-2, from memory


def _verify() -> tuple[int, str, str]:
    out, err = io.StringIO(), io.StringIO()
    try:
        call_command("verify_audit", stdout=out, stderr=err)
        code = 0
    except SystemExit as exc:
        code = exc.code
    return code, out.getvalue(), err.getvalue()


def _lift_audit_guards(cur) -> None:
    """Inside the test's transaction (rolled back after it): switch the audit triggers off, as a
    database owner could, to simulate tampering."""
    if connection.vendor == "sqlite":
        cur.execute("DROP TRIGGER IF EXISTS audit_no_update")
        cur.execute("DROP TRIGGER IF EXISTS audit_no_delete")
    else:
        cur.execute("SET CONSTRAINTS ALL IMMEDIATE")
        cur.execute("ALTER TABLE registry_auditevent DISABLE TRIGGER audit_append_only")


def test_hash_form_is_sha256_hex():
    assert hashlib.sha256(b"").hexdigest() == SHA256_EMPTY
    assert len(GENESIS_HASH) == 64 and set(GENESIS_HASH) == {"0"}


def test_every_row_is_linked_to_the_one_before(manager):
    make_mark(manager, "CH-1")
    make_mark(manager, "CH-2")
    audit_record(actor=manager, action="test_note", obj=manager, after={"x": 1.5, "big": 1e20, "n": 3.0})
    rows = list(AuditEvent.objects.order_by("seq"))
    assert [r.seq for r in rows] == list(range(1, len(rows) + 1))
    assert rows[0].prev_hash == GENESIS_HASH
    for earlier, later in zip(rows, rows[1:], strict=False):
        assert later.prev_hash == earlier.row_hash
    for row in rows:  # the stored hash is the SHA-256 of the canonical text, recomputed from the row read back
        expected = hashlib.sha256(
            chain_payload(
                seq=row.seq,
                at=row.at,
                actor_id=row.actor_id,
                action=row.action,
                object_type=row.object_type,
                object_id=row.object_id,
                object_repr=row.object_repr,
                mark_id=row.mark_id,
                before=row.before,
                after=row.after,
                note=row.note,
                prev_hash=row.prev_hash,
            )
        ).hexdigest()
        assert row.row_hash == expected
    report = audit_verify_chain()
    assert report.intact and report.total == len(rows) and report.head_hash == rows[-1].row_hash
    code, out, err = _verify()
    assert code == 0 and "intact" in out and rows[-1].row_hash in out and not err


def test_bulk_created_rows_are_chained_in_order(manager):
    make_mark(manager, "CH-1")
    AuditEvent.objects.bulk_create(
        [AuditEvent(action="bulk_test", object_type="t", object_id=str(i), object_repr=f"row {i}") for i in range(5)]
    )
    assert list(AuditEvent.objects.filter(action="bulk_test").order_by("seq").values_list("object_id", flat=True)) == [
        "0",
        "1",
        "2",
        "3",
        "4",
    ]
    assert audit_verify_chain().intact


def test_a_changed_row_is_the_first_broken_link(manager):
    for code in ("CH-1", "CH-2", "CH-3"):
        make_mark(manager, code)
    second = AuditEvent.objects.get(seq=2)
    with connection.cursor() as cur:
        _lift_audit_guards(cur)
        cur.execute("UPDATE registry_auditevent SET note = %s WHERE id = %s", ["rewritten", second.pk])
    report = audit_verify_chain()
    assert not report.intact and report.broken.row_id == second.pk and report.head_seq == 1
    assert "content does not match" in report.broken.problem
    code, out, err = _verify()
    assert code == 1 and f"BROKEN at row {second.pk}" in err and "place 2" in err


def test_a_removed_row_and_a_recomputed_row_are_found(manager):
    for code in ("CH-1", "CH-2", "CH-3", "CH-4"):
        make_mark(manager, code)
    with connection.cursor() as cur:
        _lift_audit_guards(cur)
        cur.execute("DELETE FROM registry_auditevent WHERE seq = 2")
    report = audit_verify_chain()
    assert report.broken.seq == 3 and "missing" in report.broken.problem
    # Someone who also recomputes the changed row's own hash still breaks the next link.
    with connection.cursor() as cur:
        third = AuditEvent.objects.get(seq=3)
        third.note = "rewritten"
        cur.execute(
            "UPDATE registry_auditevent SET seq = 2, note = %s, row_hash = %s WHERE id = %s",
            ["rewritten", row_hash_of(third, seq=2), third.pk],
        )
    report = audit_verify_chain()
    assert report.broken.seq == 2 and "does not point to the row before it" in report.broken.problem


def test_load_demo_reset_leaves_an_intact_chain(manager, settings):
    make_mark(manager, "OWN-1")  # a row that is not the demo's, before and after the demo's
    call_command("load_demo", stdout=io.StringIO())
    make_mark(manager, "OWN-2")
    assert audit_verify_chain().intact
    call_command("load_demo", "--reset", stdout=io.StringIO())
    report = audit_verify_chain()
    assert report.intact, report.broken


# ----------------------------------------------------------------------------------- PostgreSQL only


def _skip_unless_postgresql():
    if connection.vendor != "postgresql":
        pytest.skip(
            "PostgreSQL only (roles and TRUNCATE): run with DATABASE_URL=postgres://postgres@127.0.0.1:5432/reg_<you>"
        )


@pytest.fixture
def runtime_role(db):
    """A runtime role made for this test (inside its transaction, so it is rolled back with it)."""
    _skip_unless_postgresql()
    name = f"{connection.settings_dict['NAME']}_runtime"[:63]
    q = connection.ops.quote_name(name)
    with connection.cursor() as cur:
        cur.execute("SELECT rolsuper, rolcreaterole FROM pg_roles WHERE rolname = current_user")
        superuser, createrole = cur.fetchone()
        if not (superuser or createrole):
            pytest.skip("the test login may not create roles: give it CREATEROLE (deploy/test.sh does)")
        cur.execute("SELECT 1 FROM pg_roles WHERE rolname = %s", [name])
        if cur.fetchone() is None:
            cur.execute(f"CREATE ROLE {q} NOLOGIN")
        if not superuser:
            cur.execute(f"GRANT {q} TO current_user")
    grant_runtime_role(connection, name)
    return q


REFUSED_TO_THE_RUNTIME_ROLE = [
    "UPDATE registry_auditevent SET note = 'rewritten'",
    "DELETE FROM registry_auditevent",
    "TRUNCATE registry_auditevent CASCADE",
    "ALTER TABLE registry_auditevent DISABLE TRIGGER ALL",
    "ALTER TABLE registry_auditevent DISABLE TRIGGER audit_append_only",
    "DROP TRIGGER audit_no_truncate ON registry_auditevent",
    "DROP TABLE registry_auditevent CASCADE",
]


def test_runtime_role_writes_rows_but_cannot_rewrite_the_trail(manager, runtime_role):
    with connection.cursor() as cur:
        cur.execute(f"SET LOCAL ROLE {runtime_role}")
        make_mark(manager, "RT-1")  # the services work as the runtime role (marks, audit rows, sequences)
        cur.execute("SELECT current_user")
        assert cur.fetchone()[0] == runtime_role.strip('"')
        for sql in REFUSED_TO_THE_RUNTIME_ROLE:
            with pytest.raises(DatabaseError) as info, transaction.atomic():
                cur.execute(sql)
            text = str(info.value)
            assert "permission denied" in text or "must be owner" in text, (sql, text)
        cur.execute("RESET ROLE")
    assert AuditEvent.objects.filter(action="mark_create").count() == 1
    assert audit_verify_chain().intact


def test_the_batch_import_works_as_the_runtime_role(manager, runtime_role):
    """The import's batch path takes ids from the sequences and COPYs rows: INSERT and sequence USAGE suffice."""
    from registry.services.imports import mark_import

    header = "code,name,monument,frame_epsg,epoch_yr,lat_deg,lon_deg,h_m,sigma_e_mm,sigma_n_mm,sigma_u_mm,source"
    rows = [f"RTB-{i},Invented,disk_concrete,7912,2021.5,45.2{i},-110.6,1500.5,4,5,9,demo" for i in range(3)]
    with connection.cursor() as cur:
        cur.execute(f"SET LOCAL ROLE {runtime_role}")
        summary = mark_import(actor=manager, content="\n".join([header, *rows]) + "\n", filename="rt.csv")
        cur.execute("RESET ROLE")
    assert summary.created == ["RTB-0", "RTB-1", "RTB-2"]
    assert AuditEvent.objects.filter(action="position_publish").count() == 3
    assert audit_verify_chain().intact


def test_the_owner_cannot_truncate_the_trail_by_accident(manager):
    _skip_unless_postgresql()
    make_mark(manager, "TR-1")
    with connection.cursor() as cur:
        cur.execute("SET LOCAL registry.audit_truncate = ''")
        cur.execute("SET CONSTRAINTS ALL IMMEDIATE")  # else PostgreSQL refuses for the queued foreign-key checks
        for sql in ("TRUNCATE registry_auditevent", "TRUNCATE registry_mark CASCADE"):
            with pytest.raises(DatabaseError, match="TRUNCATE refused"), transaction.atomic():
                cur.execute(sql)
    assert AuditEvent.objects.count() == 1


def test_grants_leave_the_runtime_role_insert_and_select_only_on_the_trail(runtime_role):
    with connection.cursor() as cur:
        for privilege, expected in [
            ("SELECT", True),
            ("INSERT", True),
            ("UPDATE", False),
            ("DELETE", False),
            ("TRUNCATE", False),
            ("REFERENCES", False),
            ("TRIGGER", False),
        ]:
            cur.execute(
                "SELECT has_table_privilege(%s, 'registry_auditevent', %s)", [runtime_role.strip('"'), privilege]
            )
            assert cur.fetchone()[0] is expected, privilege
        cur.execute("SELECT has_table_privilege(%s, 'registry_mark', 'UPDATE')", [runtime_role.strip('"')])
        assert cur.fetchone()[0] is True


@pytest.mark.django_db(transaction=True)
def test_concurrent_writers_keep_one_chain(manager):
    _skip_unless_postgresql()
    from django.db import connections

    barrier = threading.Barrier(4)
    errors: list[BaseException] = []

    def writer(n: int) -> None:
        try:
            barrier.wait(timeout=10)
            for i in range(8):
                with transaction.atomic():
                    audit_record(actor=None, action="concurrency_test", obj=manager, note=f"writer {n} row {i}")
        except BaseException as exc:  # reported below
            errors.append(exc)
        finally:
            connections.close_all()

    threads = [threading.Thread(target=writer, args=(n,)) for n in range(4)]
    for t in threads:
        t.start()
    for t in threads:
        t.join(timeout=60)
    assert not errors
    assert AuditEvent.objects.filter(action="concurrency_test").count() == 32
    report = audit_verify_chain()
    assert report.intact, report.broken


def test_deploy_check_warns_when_the_login_could_rewrite_the_trail(runtime_role, settings):
    from registry.checks import check_audit_role

    settings.PRODUCTION = True
    warnings = check_audit_role(databases=["default"])  # the test login owns the tables
    assert [w.id for w in warnings] == ["registry.W030"] and "owns the audit table" in warnings[0].msg
    with connection.cursor() as cur:
        cur.execute(f"SET LOCAL ROLE {runtime_role}")
        assert check_audit_role(databases=["default"]) == []
        cur.execute("RESET ROLE")


def _canonical_as_written(value):
    """The canonical form's rule as the chain's documentation states it, written out plainly (the reference
    the chain's faster version is compared with): integral numbers below 2**53 as integers, every other
    number as a float, keys as text, tuples as lists, other objects as their text."""
    if value is None or isinstance(value, bool | str):
        return value
    if isinstance(value, int | float):
        number = float(value)
        return int(number) if number.is_integer() and abs(number) < 2**53 else number
    if isinstance(value, dict):
        return {str(k): _canonical_as_written(v) for k, v in value.items()}
    if isinstance(value, list | tuple):
        return [_canonical_as_written(v) for v in value]
    return str(value)


_json_leaf = st.one_of(
    st.none(),
    st.booleans(),
    st.text(max_size=8),
    st.integers(min_value=-(2**60), max_value=2**60),
    st.sampled_from([2**53 - 1, 2**53, -(2**53), 2**53 + 1, 10**20]),
    st.floats(allow_nan=False, allow_infinity=False),
    st.sampled_from([0.0, -0.0, 3.0, 1e20, 2.0**53, 1.5, float(2**53 - 1)]),
    st.builds(np.float64, st.floats(allow_nan=False, allow_infinity=False, width=32)),
)
_json_values = st.recursive(
    _json_leaf,
    lambda inner: st.one_of(
        st.lists(inner, max_size=4),
        st.tuples(inner, inner),
        st.dictionaries(st.one_of(st.text(max_size=5), st.integers(-5, 5)), inner, max_size=5),
    ),
    max_leaves=20,
)


@given(_json_values)
@settings(max_examples=300)
def test_the_canonical_form_follows_its_rule_for_any_json_value(value):
    """The chain's canonical form (fast paths by exact type) gives the same JSON text as the rule written
    out plainly, for nested values with bools, big integers, integral floats, numpy floats, int keys."""
    from registry.models.audit import _canonical

    fast = json.dumps(_canonical(value), sort_keys=True, separators=(",", ":"))
    plain = json.dumps(_canonical_as_written(value), sort_keys=True, separators=(",", ":"))
    assert fast == plain
