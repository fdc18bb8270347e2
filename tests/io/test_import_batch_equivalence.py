"""The import's batch path leaves the registry as the services, one mark at a time, leave it.

The same invented file (a fictional district near 45.2° N, 110.6° W) is imported twice into one
registry: once with its codes prefixed ``B`` through the batch path, once prefixed ``S`` with
``batch=False`` (every mark through ``mark_create`` / ``position_propose`` / ``position_publish``).
Marks, positions, movement checks and audit rows must then be the same, mark by mark, apart from
ids, times and the codes themselves. Frames: EPSG:7912 (ITRF2014), EPSG:9989 (ITRF2020) and
EPSG:6319 (NAD83(2011)), all geographic 3D in the EPSG database shipped with PROJ.
"""

from __future__ import annotations

import io
import re

import pytest
from django.core.management import call_command

from registry.models import AuditEvent, Mark, MovementCheck, Position
from registry.services.imports import mark_import

HEADER = (
    "code,name,monument,status,frame_epsg,epoch_yr,lat_deg,lon_deg,h_m,sigma_e_mm,sigma_n_mm,sigma_u_mm,"
    "vel_e_m_yr,vel_n_m_yr,vel_u_m_yr,source,notes"
)
ROWS = [
    # one position
    "{p}-01,Willow gate,disk_concrete,active,7912,2021.5,45.201234567,-110.601234567,1502.3456,4,5,9,,,,c1,",
    # no position, retired
    "{p}-02,Old pin,pin_concrete,retired,,,,,,,,,,,,,kept for the record",
    # two frames, different epochs: the second is compared with the first through a frame change
    "{p}-03,Creek bolt,bolt_structure,,7912,2021.5,45.21,-110.59,1498.1,3,3,7,,,,c1,",
    "{p}-03,Creek bolt,bolt_structure,,6319,2010.0,45.210001,-110.590001,1499.0,5,6,11,,,,c2,",
    # three frames; the last one 5 m away with millimetre sigmas: possible movement, published by the import
    "{p}-04,Ridge disk,disk_rock,active,7912,2021.5,45.22,-110.58,1600.0,2,2,4,0.01,0.005,0.001,c1,",
    "{p}-04,Ridge disk,disk_rock,active,9989,2021.5,45.22,-110.58,1600.0,2,2,4,,,,c3,",
    "{p}-04,Ridge disk,disk_rock,active,6319,2021.5,45.22005,-110.58,1600.0,1,1,2,,,,c4,",
    # retired with two positions
    "{p}-05,Barn corner,disk_concrete,retired,7912,2015.25,45.23,-110.57,1550.0,6,6,12,,,,c5,",
    "{p}-05,Barn corner,disk_concrete,retired,9989,2015.25,45.23,-110.57,1550.0,6,6,12,,,,c5,",
]


def file_text(prefix: str) -> bytes:
    return ("\n".join([HEADER, *(row.format(p=prefix) for row in ROWS)]) + "\n").encode()


TIMES = {"at", "created_at", "updated_at", "decided_at", "superseded_at", "suspect_since"}


def state_of(prefix: str) -> dict:
    """Everything stored for the marks of ``prefix``, ids replaced by names and codes by ``CODE``."""
    marks = list(Mark.objects.filter(code__startswith=prefix + "-").order_by("code"))
    names: dict[tuple[str, int], str] = {}
    for mark in marks:
        names[("mark", mark.pk)] = mark.code.replace(prefix, "CODE")
    positions = list(Position.objects.filter(mark__in=marks).order_by("id"))
    for p in positions:
        names[("position", p.pk)] = f"{names[('mark', p.mark_id)]}@{p.frame_epsg}"
    checks = list(MovementCheck.objects.filter(position__in=positions).order_by("id"))
    for c in checks:
        names[("check", c.pk)] = f"{names[('position', c.position_id)]}/{c.stage}"

    def name(kind, pk):
        return None if pk is None else names[(kind, int(pk))]

    def text(value):
        value = value.replace(prefix + "-", "CODE-")
        return re.sub(r"position (\d+)", lambda m: f"position {name('position', m.group(1))}", value)

    def clean(d, obj_kind=None):
        if d is None:
            return None
        out = {}
        for key, value in d.items():
            if key in TIMES or key == "id":
                continue
            if key == "mark_id":
                value = name("mark", value)
            elif key in ("compared_with_id", "supersedes_id", "superseded_by_id", "position_id"):
                value = name("position", value)
            elif key == "movement_check_id":
                value = name("check", value)
            elif isinstance(value, str):
                value = text(value)
            elif isinstance(value, list):
                value = [text(v) if isinstance(v, str) else v for v in value]
            out[key] = value
        return out

    def row(obj):
        return {
            f.attname: getattr(obj, f.attname)
            for f in obj._meta.concrete_fields
            if f.attname not in TIMES | {"id", "geog"}
        }

    audit = []
    for mark in marks:
        for e in AuditEvent.objects.filter(mark=mark).order_by("seq"):
            kind = {"mark": "mark", "position": "position"}[e.object_type]
            audit.append(
                (
                    e.action,
                    e.object_type,
                    name(kind, e.object_id),
                    text(re.sub(r"^\d+:", lambda m: name("mark", m.group(0)[:-1]) + ":", e.object_repr)),
                    clean(e.before),
                    clean(e.after),
                    e.note,
                    e.actor_id,
                )
            )
    return {
        "marks": [clean(row(m)) for m in marks],
        "positions": [clean(row(p)) for p in positions],
        "checks": [clean(row(c)) for c in checks],
        "audit": audit,
    }


def test_batch_path_and_services_store_the_same(manager):
    batched = mark_import(actor=manager, content=file_text("B"), filename="f.csv")
    by_services = mark_import(actor=manager, content=file_text("S"), filename="f.csv", batch=False)
    assert batched.created == [c.replace("S-", "B-") for c in by_services.created]
    assert batched.positions_published == by_services.positions_published == 8
    b, s = state_of("B"), state_of("S")
    assert len(b["checks"]) == 16 and len(b["audit"]) == 5 + 2 * 8
    for key in ("marks", "positions", "checks", "audit"):
        assert len(b[key]) == len(s[key]), key
        for x, y in zip(b[key], s[key], strict=True):
            assert x == y, key
    # the verdicts the file was built for (checked here so that the comparison above compares something)
    verdicts = {c["position_id"]: c["verdict"] for c in b["checks"] if c["stage"] == "published"}
    assert verdicts["CODE-01@7912"] == "not_compared" and verdicts["CODE-04@6319"] == "possible_movement"
    assert verdicts["CODE-03@6319"] != "not_compared" and verdicts["CODE-05@9989"] == "no_movement"
    assert Mark.objects.get(code="B-04").search_lat_deg == pytest.approx(45.22005)
    out = io.StringIO()
    call_command("verify_audit", stdout=out)
    assert "broken" not in out.getvalue().lower()
