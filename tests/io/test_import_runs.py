"""Imports that must not hold a worker: absurd headers, the batch path, capped error pages, background runs.

The marks are invented (a fictional district near 45.2° N, 110.6° W); EPSG:7912 is ITRF2014
geographic 3D in the EPSG database shipped with PROJ.
"""

from __future__ import annotations

import csv
import io
import time

import pytest
from django.core.files.uploadedfile import SimpleUploadedFile
from django.core.management import call_command
from django.db import IntegrityError

from registry.models import AuditEvent, ImportState, Mark, MarkImportRun, MovementCheck, Position, PositionState
from registry.services.imports import ERRORS_SHOWN, ImportRejected, mark_import
from registry.services.marks import mark_create
from registry.services.positions import position_propose, position_publish

HEADER = "code,name,monument,frame_epsg,epoch_yr,lat_deg,lon_deg,h_m,sigma_e_mm,sigma_n_mm,sigma_u_mm,source"


def good_rows(n: int, prefix: str = "RUN") -> list[str]:
    return [
        f"{prefix}-{i:04d},Invented {i},disk_concrete,7912,2021.5,{45.2 + i * 1e-4:.9f},-110.600000000,1500.5,4,5,9,demo"
        for i in range(n)
    ]


def csv_text(rows: list[str], header: str = HEADER) -> str:
    return "\n".join([header, *rows]) + "\n"


def upload(client, text: str, name: str = "marks.csv", **extra):
    data = {"file": SimpleUploadedFile(name, text.encode(), content_type="text/csv"), **extra}
    return client.post("/marks/import/", data)


# --- Headers ------------------------------------------------------------------------------------------


def test_a_header_of_100000_columns_is_refused_at_once(manager):
    wide = ",".join(f"col{i}" for i in range(100_000)) + "\n" + ",".join("x" * 1 for _ in range(100_000)) + "\n"
    t0 = time.perf_counter()
    with pytest.raises(ImportRejected) as caught:
        mark_import(actor=manager, content=wide.encode(), filename="wide.csv")
    elapsed = time.perf_counter() - t0
    assert [e.code for e in caught.value.errors] == ["too_many_columns"]
    assert "100,000 columns" in caught.value.errors[0].message
    # Was 116 s (a quadratic repeated-column check); a generous bound that a quadratic check cannot meet.
    assert elapsed < 10


def test_unknown_and_repeated_columns_are_named_but_at_most_twenty(manager):
    header = HEADER + "," + ",".join(f"extra{i}" for i in range(30)) + ",name"
    with pytest.raises(ImportRejected) as caught:
        mark_import(actor=manager, content=csv_text([], header=header).encode(), filename="x.csv")
    by_code = {e.code: e.message for e in caught.value.errors}
    assert "'extra0'" in by_code["unknown_column"] and "'extra19'" in by_code["unknown_column"]
    assert "'extra20'" not in by_code["unknown_column"] and "and 10 more" in by_code["unknown_column"]
    assert by_code["repeated_column"] == "repeated column(s): 'name'"


# --- The batch path -----------------------------------------------------------------------------------


def test_new_marks_are_written_in_batches_not_a_query_per_row(manager, django_assert_max_num_queries):
    text = csv_text(good_rows(300))
    # 300 marks and 300 positions through the services took about thirty queries a row.
    with django_assert_max_num_queries(60):
        summary = mark_import(actor=manager, content=text.encode(), filename="batch.csv")
    assert len(summary.created) == 300 and summary.positions_published == 300
    assert Position.objects.filter(state=PositionState.PUBLISHED).count() == 300
    mark = Mark.objects.get(code="RUN-0007")
    assert mark.search_lat_deg == pytest.approx(45.2007) and mark.version == 1


def _comparable(event: AuditEvent) -> tuple:
    volatile = {
        "id",
        "mark",
        "mark_id",
        "created_at",
        "updated_at",
        "decided_at",
        "superseded_at",
        "supersedes_id",
        "movement_check_id",
    }

    def clean(d):
        return None if d is None else {k: v for k, v in d.items() if k not in volatile}

    return event.action, event.object_type, clean(event.before), clean(event.after), event.note


def test_the_batch_path_writes_the_audit_rows_the_services_write(manager):
    # Through the services, by hand: a new mark and its first position, proposed then published.
    a = mark_create(actor=manager, data={"code": "SVC-1", "name": "Invented", "monument": "disk_concrete"})
    p = position_propose(
        actor=manager,
        mark_code=a.code,
        data={
            "frame_epsg": 7912,
            "epoch_yr": 2021.5,
            "lat_deg": 45.2,
            "lon_deg": -110.6,
            "h_m": 1500.5,
            "cov_ee_m2": (4 / 1000) ** 2,
            "cov_nn_m2": (5 / 1000) ** 2,
            "cov_uu_m2": (9 / 1000) ** 2,
            "source": "demo",
        },
    )
    position_publish(actor=manager, position_id=p.pk, note="published by import")
    by_hand = [_comparable(e) for e in AuditEvent.objects.filter(mark=a).order_by("seq")]
    # The same through the import's batch path (a new mark with one position takes it).
    text = csv_text(["BAT-1,Invented,disk_concrete,7912,2021.5,45.2,-110.6,1500.5,4,5,9,demo"])
    mark_import(actor=manager, content=text.encode(), filename="one.csv")
    b = Mark.objects.get(code="BAT-1")
    batched = [_comparable(e) for e in AuditEvent.objects.filter(mark=b).order_by("seq")]

    def rename(rows, code):
        return [tuple(str(x).replace(code, "CODE") for x in row) for row in rows]

    assert [row[0] for row in batched] == ["mark_create", "position_propose", "position_publish"]
    assert rename(batched, "BAT-1") == rename(by_hand, "SVC-1")
    # the movement checks the services store, one per stage, nothing to compare with
    checks = MovementCheck.objects.filter(position__mark=b).order_by("stage")
    assert [(c.stage, c.verdict) for c in checks] == [("proposed", "not_compared"), ("published", "not_compared")]
    assert (b.search_lat_deg, b.search_lon_deg) == (45.2, -110.6)
    out = io.StringIO()
    call_command("verify_audit", stdout=out)
    assert "broken" not in out.getvalue().lower()


def test_a_batch_the_database_refuses_is_redone_mark_by_mark(manager, monkeypatch):
    from registry.services import import_bulk

    insert_rows = import_bulk.insert_rows

    def refuse(model, rows, **kwargs):
        if model is Position:
            raise IntegrityError("refused for the test")
        return insert_rows(model, rows, **kwargs)

    monkeypatch.setattr(import_bulk, "insert_rows", refuse)
    summary = mark_import(actor=manager, content=csv_text(good_rows(5)).encode(), filename="f.csv")
    assert summary.created == [f"RUN-{i:04d}" for i in range(5)]
    assert Position.objects.filter(state=PositionState.PUBLISHED).count() == 5
    assert AuditEvent.objects.filter(action="position_publish").count() == 5


def test_a_row_error_found_in_the_batch_path_is_reported_and_nothing_written(manager):
    # The file's reader leaves the notes' length to the services' text limit (20,000 characters).
    rows = [row + "," for row in good_rows(3)]
    rows.append("RUN-BAD,x,disk_concrete,,,,,,,,,," + "n" * 20_001)
    with pytest.raises(ImportRejected) as caught:
        mark_import(actor=manager, content=csv_text(rows, header=HEADER + ",notes").encode(), filename="f.csv")
    assert {(e.where, e.code) for e in caught.value.errors} == {("line 5", "max_length")}
    assert Mark.objects.count() == 0 and AuditEvent.objects.count() == 0


# --- Capped error reports -----------------------------------------------------------------------------


def test_the_page_shows_the_first_200_problems_and_the_full_list_downloads(client, manager):
    client.force_login(manager)
    bad = [f"BAD-{i:04d},x,disk_concrete,7912,2021.5,95.0,-110.6,1500,4,5,9,demo" for i in range(450)]
    response = upload(client, csv_text(bad))
    assert response.status_code == 400
    body = response.content.decode()
    assert body.count('class="mono where"') == ERRORS_SHOWN
    assert 'The first <span class="num">200</span> of <span class="num">450</span> problems' in body
    run = MarkImportRun.objects.get()
    assert run.state == ImportState.REFUSED and run.error_count == 450 and bytes(run.content) == b""
    download = client.get(f"/marks/import/runs/{run.pk}/problems.csv")
    assert download.status_code == 200 and download["Content-Type"].startswith("text/csv")
    rows = list(csv.reader(io.StringIO(download.content.decode())))
    assert rows[0] == ["where", "mark", "column", "problem", "code"] and len(rows) == 451
    assert rows[450][0] == "line 451" and rows[450][1] == "BAD-0449"
    assert Mark.objects.count() == 0


def test_refusal_details_carry_at_most_200_errors_with_the_count(manager):
    bad = [f"BAD-{i:04d},x,disk_concrete,7912,2021.5,95.0,-110.6,1500,4,5,9,demo" for i in range(300)]
    with pytest.raises(ImportRejected) as caught:
        mark_import(actor=manager, content=csv_text(bad).encode(), filename="bad.csv")
    details = caught.value.details
    assert len(details["errors"]) == 200 and details["error_count"] == 300
    assert len(caught.value.errors) == 300


def test_problems_download_is_for_managers_only(client, manager, viewer):
    client.force_login(manager)
    upload(client, csv_text(["BAD-1,x,disk_concrete,7912,2021.5,95.0,-110.6,1500,4,5,9,demo"]))
    run = MarkImportRun.objects.get()
    client.force_login(viewer)
    assert client.get(f"/marks/import/runs/{run.pk}/problems.csv").status_code == 403
    assert client.get(f"/marks/import/runs/{run.pk}/").status_code == 403


# --- Background runs ----------------------------------------------------------------------------------


def test_a_large_file_is_queued_and_the_page_follows_it(client, manager, settings, django_capture_on_commit_callbacks):
    settings.REGISTRY_IMPORT_INLINE_BYTES = 100  # every file is "large" here
    client.force_login(manager)
    with django_capture_on_commit_callbacks(execute=False) as callbacks:
        response = upload(client, csv_text(good_rows(20)))
    run = MarkImportRun.objects.get()
    assert response.status_code == 302 and response["Location"] == f"/marks/import/runs/{run.pk}/"
    waiting = client.get(response["Location"])
    assert run.state == ImportState.QUEUED and Mark.objects.count() == 0
    body = waiting.content.decode()
    assert 'http-equiv="refresh"' in body and "waiting for a worker" in body and "<progress" in body
    for callback in callbacks:  # the request's transaction commits: the task is queued (and run at once here)
        callback()
    run.refresh_from_db()
    assert run.state == ImportState.DONE and run.summary["rows"] == 20 and bytes(run.content) == b""
    assert run.task_id
    done = client.get(f"/marks/import/runs/{run.pk}/").content.decode()
    assert "Imported" in done and 'http-equiv="refresh"' not in done
    assert Mark.objects.count() == 20


def test_a_run_is_executed_once_even_if_the_task_is_delivered_twice(manager, settings):
    from registry.services.import_runs import import_run_execute, import_run_start

    settings.REGISTRY_IMPORT_INLINE_BYTES = 10**9
    run = import_run_start(actor=manager, content=csv_text(good_rows(2)).encode(), filename="two.csv")
    assert run.state == ImportState.DONE
    assert import_run_execute(run.pk) == ImportState.DONE
    assert Mark.objects.count() == 2 and AuditEvent.objects.filter(action="marks_import").count() == 1


def test_progress_is_reported_in_words_before_the_writing(manager):
    seen = []
    mark_import(
        actor=manager,
        content=csv_text(good_rows(3)).encode(),
        filename="p.csv",
        progress=lambda words, fraction: seen.append((words, fraction)),
    )
    assert seen[0] == ("reading the file", 0.0)
    assert any(w.startswith("checking 3 rows") for w, _ in seen)
    assert any(w.startswith("writing 3 marks") for w, _ in seen)
    assert all(0.0 <= f <= 1.0 for _, f in seen)


def test_a_new_mark_with_two_positions_is_compared_in_the_batch(manager):
    """The second position of a new mark is checked against the first, in the batch path as by the services."""
    text = csv_text(
        [
            "TWO-1,Invented,disk_concrete,7912,2021.5,45.2,-110.6,1500.5,4,5,9,demo",
            "TWO-1,Invented,disk_concrete,9989,2021.5,45.2,-110.6,1500.5,4,5,9,demo",
        ]
    )
    mark_import(actor=manager, content=text.encode(), filename="two.csv")
    mark = Mark.objects.get(code="TWO-1")
    first = Position.objects.get(mark=mark, frame_epsg=7912)
    second = Position.objects.get(mark=mark, frame_epsg=9989)
    check = MovementCheck.objects.get(position=second, stage="published")
    # ITRF2014 and ITRF2020 agree to a few mm at 2021.5 (EPSG/PROJ transformation): no movement shown
    assert check.compared_with_id == first.pk and check.verdict == "no_movement"
