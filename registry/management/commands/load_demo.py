"""``python manage.py load_demo [--reset]``: load the invented Corvid Ridge demo district.

The scenario comes from ``fixtures_demo/district.py`` (deterministic, seeded; see fixtures_demo/README.md).
Loading is all or nothing, in one transaction, with bulk inserts for speed; the database's own
constraints (one published position per mark and frame, ranges, frozen published positions) still apply
to every row. Audit rows: one ``demo_load`` event, plus one ``mark_create`` and one ``job_create`` per
mark and job. Last, the suspect-mark rule is applied to the loaded visits (``services.suspect``, as
migration 0006 does for an existing registry): each active mark whose latest disturbed or not-found visit
is not older than its newest published position becomes suspect, with a ``mark_make_suspect`` row.

Running it again when the demo is loaded changes nothing and prints the demo users again. If marks with
the demo's codes (or the demo's user names) exist but were not loaded by this command, it refuses.
``--reset`` first deletes the demo's marks, their history and audit rows, the demo jobs and users. The
audit trail is append-only and published/superseded/withdrawn positions are never deleted (migrations 0003
and 0005), so the reset lifts those two delete guards inside its transaction and restores them before
committing; it is refused in production mode (``REGISTRY_PRODUCTION=1``) and meant for a development
database only.
"""

from __future__ import annotations

import datetime as dt
import importlib
import time

from django.conf import settings
from django.contrib.auth import get_user_model
from django.contrib.auth.models import Group
from django.core.management.base import BaseCommand, CommandError
from django.db import connection, transaction
from django.db.models import ProtectedError, Q

from registry.models import (
    Attachment,
    AuditEvent,
    CertificateAuthority,
    Document,
    HeightRecord,
    Job,
    Mark,
    MovementCheck,
    Occupation,
    Position,
    PositionState,
    SignatoryProfile,
    SigningCertificate,
    Visit,
)
from registry.models.audit import GENESIS_HASH, row_hash_of
from registry.models.marks import position_history_delete_allowed
from registry.roles import ensure_roles
from registry.services.audit import snapshot
from registry.services.movement import comparison_target, movement_compare
from registry.services.movement_checks import CheckStage, movement_check_store
from registry.services.suspect import suspects_from_history

REGISTRY_START = dt.datetime(2011, 6, 1, tzinfo=dt.UTC)
#: The demo signatory's invented licence (printed in the signature box of what she signs).
DEMO_LICENCE = "DEMO-0412"
DEMO_JURISDICTION = "Corvid State Board of Survey Licensure (invented, DEMO)"


def _scenario():
    from fixtures_demo.district import SEED, build_scenario

    return build_scenario(), SEED


class Command(BaseCommand):
    help = "Load the invented demo district (fictional marks, history, jobs and one user per role)."

    def add_arguments(self, parser):
        parser.add_argument(
            "--reset",
            action="store_true",
            help="delete the demo data first (development databases only; refused in production mode)",
        )

    def handle(self, *args, **opts):
        started = time.perf_counter()
        if getattr(settings, "PRODUCTION", False):
            raise CommandError("load_demo is for demonstration and development; it is refused in production mode.")
        scenario, seed = _scenario()
        codes = [m.code for m in scenario.marks]
        usernames = [u.username for u in scenario.users]
        User = get_user_model()

        if opts["reset"]:
            counts = self._wipe(codes, usernames, [j.code for j in scenario.jobs])
            self.stdout.write("Reset: deleted " + ", ".join(f"{n} {what}" for what, n in counts.items()) + ".")
        loaded = AuditEvent.objects.filter(action="demo_load").exists()
        present = Mark.objects.filter(code__in=codes).exists() or User.objects.filter(username__in=usernames).exists()
        if present and loaded:
            self.stdout.write("The demo district is already loaded; nothing was changed.")
            self._print_users(scenario)
            return
        if present:
            raise CommandError(
                "Marks with the demo's codes or users with the demo's names exist, but were not loaded by load_demo. "
                "Nothing was changed. In a development database, run load_demo --reset to replace them."
            )

        with transaction.atomic():
            counts = self._load(scenario, seed)
        elapsed = time.perf_counter() - started
        self.stdout.write(
            "Loaded the Corvid Ridge demo district (invented data) in "
            f"{elapsed:.1f} s: " + ", ".join(f"{n} {what}" for what, n in counts.items()) + "."
        )
        self._print_users(scenario)

    # ------------------------------------------------------------------------------------------------
    def _print_users(self, scenario) -> None:
        self.stdout.write("")
        self.stdout.write("Demo users (DEMO-ONLY passwords: never use these accounts or passwords on a real registry):")
        for u in scenario.users:
            self.stdout.write(
                f"  {u.role:<10} {u.username:<16} {u.password:<26} {u.first_name} {u.last_name}, {u.title}"
            )
        self.stdout.write(
            f"The demo signatory signs with a DEMO certificate (invented licence {DEMO_LICENCE}); signing asks for "
            "her password again."
        )
        self.stdout.write("All names, agencies, marks and coordinates are invented. Verify real control in the field.")

    def _load(self, scenario, seed) -> dict[str, int]:
        User = get_user_model()
        ensure_roles()
        users = {}
        for u in scenario.users:
            user = User.objects.create_user(
                username=u.username,
                password=u.password,
                first_name=u.first_name,
                last_name=u.last_name,
                email=f"{u.username}@example.invalid",
            )
            user.groups.add(Group.objects.get(name=u.role))
            users[u.role] = user
        manager, technician = users["manager"], users["technician"]

        # Marks, with the search location of their most recently published position (any frame).
        latest: dict[str, object] = {}
        for p in scenario.positions:
            if p.state == "published" and (p.mark_code not in latest or p.decided_at >= latest[p.mark_code].decided_at):
                latest[p.mark_code] = p
        marks = []
        for m in scenario.marks:
            where = latest.get(m.code)
            marks.append(
                Mark(
                    code=m.code,
                    name=m.name,
                    access_directions=m.access_directions,
                    monument=m.monument,
                    monument_detail=m.monument_detail,
                    marking=m.marking,
                    stability=m.stability,
                    sky_view=m.sky_view,
                    keeper=m.keeper,
                    status=m.status,
                    notes=m.notes,
                    search_lat_deg=where.lat_deg if where else None,
                    search_lon_deg=where.lon_deg if where else None,
                )
            )
        Mark.objects.bulk_create(marks)
        mark_by_code = {m.code: m for m in Mark.objects.filter(code__in=[m.code for m in marks])}
        for m in scenario.marks:
            mark_by_code[m.code].created_at = max(m.established, REGISTRY_START)
        Mark.objects.bulk_update(mark_by_code.values(), ["created_at"], batch_size=500)

        # Positions: inserted first, then linked (older → the one that superseded it).
        rows = []
        for p in scenario.positions:
            vel = p.vel_m_yr or (None, None, None)
            vsig = p.vel_sigma_m_yr or (None, None, None)
            decided_by = manager if p.decided_at is not None else None
            rows.append(
                Position(
                    mark=mark_by_code[p.mark_code],
                    frame_epsg=p.frame_epsg,
                    epoch_yr=p.epoch_yr,
                    lat_deg=p.lat_deg,
                    lon_deg=p.lon_deg,
                    h_m=p.h_m,
                    cov_ee_m2=p.cov_m2[0],
                    cov_en_m2=p.cov_m2[1],
                    cov_eu_m2=p.cov_m2[2],
                    cov_nn_m2=p.cov_m2[3],
                    cov_nu_m2=p.cov_m2[4],
                    cov_uu_m2=p.cov_m2[5],
                    vel_e_m_yr=vel[0],
                    vel_n_m_yr=vel[1],
                    vel_u_m_yr=vel[2],
                    vel_sigma_e_m_yr=vsig[0],
                    vel_sigma_n_m_yr=vsig[1],
                    vel_sigma_u_m_yr=vsig[2],
                    source=p.source,
                    state=p.state,
                    note=p.note,
                    created_by=technician if p.state in ("proposed", "rejected") else manager,
                    decided_by=decided_by,
                    decided_at=p.decided_at,
                    superseded_at=p.superseded_at,
                )
            )
        Position.objects.bulk_create(rows, batch_size=500)
        if any(r.pk is None for r in rows):  # a backend that does not return ids from bulk inserts
            raise CommandError("The database did not return the ids of inserted positions.")
        by_key = {p.key: row for p, row in zip(scenario.positions, rows, strict=True)}
        for p, row in zip(scenario.positions, rows, strict=True):
            row.created_at = p.created_at
            row.superseded_by = by_key[p.superseded_by_key] if p.superseded_by_key else None
        Position.objects.bulk_update(rows, ["created_at", "superseded_by"], batch_size=500)
        # Proposals get the movement check the position services store when a position is proposed
        # (services.movement), against the published position as the demo leaves it, dated with the proposal.
        for row in rows:
            if row.state == PositionState.PROPOSED:
                check = movement_check_store(
                    outcome=movement_compare(position=row, published=comparison_target(row)),
                    stage=CheckStage.PROPOSED,
                    actor=technician,
                )
                MovementCheck.objects.filter(pk=check.pk).update(created_at=row.created_at)

        occupations = [
            Occupation(
                mark=mark_by_code[o.mark_code],
                method=o.method,
                start_utc=o.start_utc,
                end_utc=o.end_utc,
                observer=o.observer,
                receiver=o.receiver,
                antenna=o.antenna,
                antenna_height_measured_m=o.antenna_height_measured_m,
                antenna_height_kind=o.antenna_height_kind,
                antenna_height_arp_m=o.antenna_height_arp_m,
                result_position=by_key[o.result_key] if o.result_key else None,
                notes=o.notes,
                created_by=technician,
            )
            for o in scenario.occupations
        ]
        Occupation.objects.bulk_create(occupations, batch_size=500)
        for o, row in zip(scenario.occupations, occupations, strict=True):
            row.created_at = o.end_utc + dt.timedelta(days=2)
        Occupation.objects.bulk_update(occupations, ["created_at"], batch_size=500)

        visits = [
            Visit(
                mark=mark_by_code[v.mark_code],
                visited_on=v.visited_on,
                finding=v.finding,
                visitor=v.visitor,
                notes=v.notes,
                created_by=technician,
            )
            for v in scenario.visits
        ]
        Visit.objects.bulk_create(visits, batch_size=500)
        for v, row in zip(scenario.visits, visits, strict=True):
            row.created_at = dt.datetime.combine(v.visited_on, dt.time(18, 0), tzinfo=dt.UTC)
        Visit.objects.bulk_update(visits, ["created_at"], batch_size=500)

        heights = [
            HeightRecord(
                mark=mark_by_code[h.mark_code],
                datum_epsg=h.datum_epsg,
                height_m=h.height_m,
                sigma_m=h.sigma_m,
                method=h.method,
                geoid_model=h.geoid_model,
                epoch_yr=h.epoch_yr,
                source=h.source,
                current=h.current,
                created_by=manager,
            )
            for h in scenario.heights
        ]
        HeightRecord.objects.bulk_create(heights, batch_size=500)
        for h, row in zip(scenario.heights, heights, strict=True):
            row.created_at = h.created_at
        HeightRecord.objects.bulk_update(heights, ["created_at"], batch_size=500)

        jobs = [
            Job(
                code=j.code,
                name=j.name,
                client=j.client,
                site_geojson=j.site_geojson,
                frame_epsg=j.frame_epsg,
                epoch_yr=j.epoch_yr,
                tol_h_mm=j.tol_h_mm,
                tol_v_mm=j.tol_v_mm,
                notes=j.notes,
                field_date=j.field_date,
                created_by=manager,
            )
            for j in scenario.jobs
        ]
        Job.objects.bulk_create(jobs)
        jobs = list(Job.objects.filter(code__in=[j.code for j in jobs]).order_by("code"))

        counts = {
            "marks": len(marks),
            "positions": len(rows),
            "occupations": len(occupations),
            "visits": len(visits),
            "height records": len(heights),
            "jobs": len(jobs),
            "users": len(users),
        }
        note = "invented demo data, loaded by load_demo"
        events = [
            AuditEvent(
                action="demo_load",
                object_type="demo",
                object_id=str(seed),
                object_repr="Corvid Ridge demo district",
                after={**counts, "seed": seed},
                note=note,
            )
        ]
        events += [
            AuditEvent(
                action="mark_create",
                object_type="mark",
                object_id=str(m.pk),
                object_repr=str(m)[:200],
                mark=m,
                after=snapshot(m),
                note=note,
            )
            for m in sorted(mark_by_code.values(), key=lambda m: m.code)
        ]
        events += [
            AuditEvent(
                action="job_create",
                object_type="job",
                object_id=str(j.pk),
                object_repr=str(j),
                after=snapshot(j),
                note=note,
            )
            for j in jobs
        ]
        AuditEvent.objects.bulk_create(events, batch_size=500)
        suspect = suspects_from_history(actor=None, note=note)
        counts["audit events"] = len(events) + len(suspect)
        counts["suspect marks"] = len(suspect)
        counts.update(self._demo_signing(users))
        return counts

    def _demo_signing(self, users) -> dict[str, int]:
        """A DEMO certificate authority (unless the office already runs one), the demo signatory's
        invented licence, and a DEMO signing certificate, through the audited services."""
        from registry.services.certificates import (
            active_authority,
            certificate_issue,
            office_ca_init,
            signatory_set_licence,
        )

        admin, signatory = users["admin"], users["signatory"]
        made = {}
        authority = active_authority()
        if authority is None:
            authority = office_ca_init(
                actor=admin, name="DEMO Corvid County signing authority", organisation="DEMO", demo=True
            )
            made["DEMO certificate authority"] = 1
        signatory_set_licence(
            actor=admin,
            username=signatory.username,
            licence_number=DEMO_LICENCE,
            jurisdiction=DEMO_JURISDICTION,
        )
        if authority.is_demo:
            certificate_issue(actor=admin, username=signatory.username, demo=True)
            made["DEMO signing certificate"] = 1
        else:
            self.stderr.write(
                "The office already runs a (non-demo) certificate authority: no DEMO certificate was issued to the "
                "demo signatory."
            )
        return made

    # ------------------------------------------------------------------------------------------------
    def _wipe(self, codes: list[str], usernames: list[str], job_codes: list[str]) -> dict[str, int]:
        User = get_user_model()
        counts: dict[str, int] = {}
        try:
            with transaction.atomic():
                marks = Mark.objects.filter(code__in=codes)
                users = User.objects.filter(username__in=usernames)
                jobs = Job.objects.filter(code__in=job_codes)
                with _audit_guard_lifted(), _audit_update_guard_lifted():
                    counts["audit events"] = AuditEvent.objects.filter(
                        Q(mark__in=marks)
                        | Q(actor__in=users)
                        | Q(action="demo_load")
                        | Q(object_type="job", object_id__in=[str(pk) for pk in jobs.values_list("pk", flat=True)])
                    ).delete()[0]
                    _relink_audit_chain()
                docs = Document.objects.filter(
                    Q(mark__in=marks) | Q(job__in=jobs) | Q(covered__mark__in=marks) | Q(created_by__in=users)
                ).distinct()
                counts["documents"] = 0
                with _document_guard_lifted():
                    # newest revision first: a revision refers to the one it supersedes
                    for doc in sorted(docs, key=lambda d: (-d.revision, -d.pk)):
                        if doc.pdf:
                            doc.pdf.delete(save=False)
                        counts["documents"] += (
                            Document.objects.filter(pk=doc.pk).delete()[1].get("registry.Document", 0)
                        )
                demo_certs = SigningCertificate.objects.filter(user__in=users)
                counts["signing certificates"] = demo_certs.delete()[0]
                SignatoryProfile.objects.filter(user__in=users).delete()
                CertificateAuthority.objects.filter(is_demo=True, certificates__isnull=True).delete()
                for att in Attachment.objects.filter(mark__in=marks):
                    att.file.delete(save=False)
                Attachment.objects.filter(mark__in=marks).delete()
                counts["occupations"] = Occupation.objects.filter(mark__in=marks).delete()[0]
                counts["visits"] = Visit.objects.filter(mark__in=marks).delete()[0]
                counts["height records"] = HeightRecord.objects.filter(mark__in=marks).delete()[0]
                Position.objects.filter(mark__in=marks).update(superseded_by=None)
                MovementCheck.objects.filter(Q(position__mark__in=marks) | Q(compared_with__mark__in=marks)).delete()
                with _position_guard_lifted(), position_history_delete_allowed():
                    counts["positions"] = Position.objects.filter(mark__in=marks).delete()[0]
                counts["marks"] = marks.delete()[1].get("registry.Mark", 0)
                counts["jobs"] = jobs.delete()[1].get("registry.Job", 0)
                counts["users"] = users.delete()[1].get(User._meta.label, 0)
        except ProtectedError as exc:
            names = sorted({type(o).__name__ for o in exc.protected_objects})
            raise CommandError(
                f"Cannot reset: other records ({', '.join(names)}) still refer to demo data. Nothing was deleted."
            ) from None
        return counts


class _delete_guard_lifted:
    """Inside a transaction: drop one delete guard (a trigger), and put it back on exit.

    SQLite: the trigger is dropped and recreated from its migration's own SQL. PostgreSQL: it is
    disabled and enabled again. Either way it is DDL inside the transaction, so a failure rolls the
    change back together with the lifted guard.
    """

    table = sqlite_trigger = pg_trigger = migration = ""

    def __enter__(self):
        vendor = connection.vendor
        with connection.cursor() as cur:
            if vendor == "sqlite":
                cur.execute(f"DROP TRIGGER IF EXISTS {self.sqlite_trigger}")
            elif vendor == "postgresql":
                # Deferred foreign-key checks queued earlier in the transaction block ALTER TABLE; run them now.
                cur.execute("SET CONSTRAINTS ALL IMMEDIATE")
                cur.execute(f"ALTER TABLE {self.table} DISABLE TRIGGER {self.pg_trigger}")
                cur.execute("SET CONSTRAINTS ALL DEFERRED")
        return self

    def __exit__(self, exc_type, exc, tb):
        if exc_type is not None:
            return False  # the transaction rolls back, and the dropped guard with it (DDL is transactional)
        vendor = connection.vendor
        with connection.cursor() as cur:
            if vendor == "sqlite":
                triggers = importlib.import_module(f"registry.migrations.{self.migration}")
                (create,) = [
                    sql for sql in triggers.SQLITE_FORWARD if sql.startswith(f"CREATE TRIGGER {self.sqlite_trigger} ")
                ]
                cur.execute(create)
            elif vendor == "postgresql":
                cur.execute("SET CONSTRAINTS ALL IMMEDIATE")
                cur.execute(f"ALTER TABLE {self.table} ENABLE TRIGGER {self.pg_trigger}")
                cur.execute("SET CONSTRAINTS ALL DEFERRED")
        return False


class _audit_guard_lifted(_delete_guard_lifted):
    """The audit trail's append-only guard on DELETE (migration 0003)."""

    table, sqlite_trigger, pg_trigger = "registry_auditevent", "audit_no_delete", "audit_append_only"
    migration = "0003_integrity_triggers"


class _audit_update_guard_lifted(_delete_guard_lifted):
    """The audit trail's guard on UPDATE, for re-linking the hash chain after the reset's deletions.

    On PostgreSQL the same trigger guards UPDATE and DELETE, so lifting it twice is harmless."""

    table, sqlite_trigger, pg_trigger = "registry_auditevent", "audit_no_update", "audit_append_only"
    migration = "0003_integrity_triggers"


def _relink_audit_chain() -> None:
    """Re-link the rows left after the reset deleted the demo's (development only, guards lifted).

    Deleting rows from the middle breaks the hash chain (registry/models/audit.py), and
    ``verify_audit`` would rightly report it; a development database that was reset starts its
    chain afresh from the rows that remain, in their order.
    """
    seq, prev = 0, GENESIS_HASH
    for event in AuditEvent.objects.order_by("seq", "id").iterator(chunk_size=2000):
        seq += 1
        digest = row_hash_of(event, seq=seq, prev_hash=prev)
        if (event.seq, event.prev_hash, event.row_hash) != (seq, prev, digest):
            AuditEvent.objects.filter(pk=event.pk).update(seq=seq, prev_hash=prev, row_hash=digest)
        prev = digest


class _document_guard_lifted(_delete_guard_lifted):
    """The guard that keeps signed and superseded documents (migration 0011)."""

    table, sqlite_trigger, pg_trigger = "registry_document", "document_no_delete", "document_no_delete"
    migration = "0011_signed_document_triggers"


class _position_guard_lifted(_delete_guard_lifted):
    """The guard that keeps published, superseded and withdrawn positions (migration 0005)."""

    table, sqlite_trigger = "registry_position", "position_history_no_delete"
    pg_trigger = "position_history_no_delete"
    migration = "0005_position_history_triggers"
