"""A task for the worker tests (imported by the office's workers by its dotted path).

It writes two marks in one transaction with a pause between them, long enough for a test to kill the
worker in the middle: the registry's tasks do their writes in one transaction (a document build writes
its document in one short transaction at the end), and this one does the same on a larger scale.
"""

from __future__ import annotations

import time

from django.contrib.auth import get_user_model
from django.db import transaction
from django_tasks import task

from registry.services.marks import mark_create


@task()
def two_marks_slowly(prefix: str, pause_s: float) -> list[str]:
    actor = get_user_model().objects.get(username="demo_manager")
    codes = [f"{prefix}-1", f"{prefix}-2"]
    with transaction.atomic():
        mark_create(actor=actor, data={"code": codes[0], "name": "Written by a background task (first)"})
        time.sleep(pause_s)
        mark_create(actor=actor, data={"code": codes[1], "name": "Written by a background task (second)"})
    return codes
