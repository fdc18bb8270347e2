"""Review N-2 and N-3: mark text in the job map's attributes and in the job CSV export.

N-3: the job's control-list CSV (opened in spreadsheets, not re-imported) prefixes text cells that
a spreadsheet could run as formulas; numbers such as ``-110.600000000`` stay as they are. The marks
CSV of ``export_marks`` is a round-trip format and is deliberately not changed (README).
"""

from __future__ import annotations

import csv
import io

import pytest

from registry.models import Mark
from registry.web.csv_safe import spreadsheet_safe, spreadsheet_safe_rows
from tests.web.test_job_pages import scenario  # noqa: F401  (fixture)

# OWASP "CSV Injection" (https://owasp.org/www-community/attacks/CSV_Injection): cells starting
# with = + - @ tab or CR are the ones spreadsheets may evaluate.
HOSTILE = ['=HYPERLINK("http://x.invalid","open")', "+1+cmd", "-2+3", "@SUM(A1)", "\t=1", "\r=1"]


@pytest.mark.parametrize("text", HOSTILE)
def test_formula_like_text_gets_an_apostrophe(text):
    assert spreadsheet_safe(text) == "'" + text


@pytest.mark.parametrize("value", ["-110.600000000", "+1.5e-3", "45.2", "River St & Third Ave", "", 6319, None])
def test_numbers_and_plain_text_are_unchanged(value):
    assert spreadsheet_safe(value) == value


def test_nan_and_inf_text_is_not_taken_for_a_number():
    assert spreadsheet_safe("-inf") == "'-inf"
    assert spreadsheet_safe("-nan") == "'-nan"


def test_rows_keep_their_keys():
    assert spreadsheet_safe_rows([{"name": "=1", "lon_deg": "-110.6"}]) == [{"name": "'=1", "lon_deg": "-110.6"}]


def test_job_csv_export_guards_mark_names(client, viewer, scenario):  # noqa: F811
    Mark.objects.filter(code__in=["BASE-N", "CHK-1"]).update(name='=HYPERLINK("http://x.invalid")')
    client.force_login(viewer)
    rows = list(csv.DictReader(io.StringIO(client.get("/jobs/J-WEB/control.csv").content.decode())))
    named = [row for row in rows if row["code"] in ("BASE-N", "CHK-1")]
    assert named, "the scenario chooses BASE-N or CHK-1"
    assert all(row["name"] == '\'=HYPERLINK("http://x.invalid")' for row in named)
    assert all(row["lon_deg"].startswith("-") and float(row["lon_deg"]) < 0 for row in rows)  # numbers untouched


def test_job_map_escapes_quotes_in_attributes(client, viewer, scenario):  # noqa: F811
    # Codes are validated by CODE_VALIDATOR in the services; written directly here to test the map alone.
    Mark.objects.filter(code="BASE-N").update(code='BASE"N')
    client.force_login(viewer)
    page = client.get("/jobs/J-WEB/").content.decode()
    assert "BASE&quot;N" in page
    assert 'data-code="BASE"N"' not in page and 'data-for="BASE"N"' not in page
