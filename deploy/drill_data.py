"""Writes for the self-test of deploy/restore_drill.sh (invented demo data only; never on a real registry).

    python deploy/drill_data.py before     # the demo district and one signed sheet (before the base backup)
    python deploy/drill_data.py between    # after the base backup: two marks and a second signed sheet
    python deploy/drill_data.py late       # after the target time: what the restore must NOT bring back

Each step goes through the registry's services, so every write has its audit row in the hash chain, as
real work does. DATABASE_URL and REGISTRY_MEDIA_ROOT say where (set by the drill script).
"""

from __future__ import annotations

import io
import os
import sys
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))
os.environ.setdefault("DJANGO_SETTINGS_MODULE", "registry.settings")

import django  # noqa: E402

django.setup()

from django.contrib.auth import get_user_model  # noqa: E402
from django.core.management import call_command  # noqa: E402

from registry.services.documents import document_build_sheet, document_check, document_sign  # noqa: E402
from registry.services.marks import mark_create  # noqa: E402

SIGNATORY_PASSWORD = "demo-only-signatory-H9"  # the demo signatory's DEMO-only password (load_demo)


def _user(name: str):
    return get_user_model().objects.get(username=name)


def _sign_sheet(mark_code: str) -> str:
    doc = document_build_sheet(actor=_user("demo_technician"), mark_code=mark_code)
    document_check(actor=_user("demo_manager"), code=doc.code)
    return document_sign(actor=_user("demo_signatory"), code=doc.code, password=SIGNATORY_PASSWORD).code


def main(step: str) -> None:
    if step == "before":
        call_command("load_demo", stdout=io.StringIO())
        print("signed", _sign_sheet("ASH-024"))
    elif step == "between":
        for code in ("DRILL-A1", "DRILL-A2"):
            mark_create(actor=_user("demo_manager"), data={"code": code, "name": f"Drill mark {code}"})
        print("signed", _sign_sheet("CRV-119"))
    elif step == "late":
        for code in ("DRILL-LATE-1", "DRILL-LATE-2", "DRILL-LATE-3"):
            mark_create(actor=_user("demo_manager"), data={"code": code, "name": f"Written after the target {code}"})
        print("signed", _sign_sheet("CRV-119"))  # supersedes the sheet signed before the target
    else:
        raise SystemExit(f"unknown step {step!r}: before, between or late")


if __name__ == "__main__":
    main(sys.argv[1] if len(sys.argv) > 1 else "")
