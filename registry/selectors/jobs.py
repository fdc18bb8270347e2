"""Reads of jobs for lists (the page and the API share them)."""

from __future__ import annotations

from django.db.models import QuerySet

from registry.models import Job


def jobs_in_order() -> QuerySet[Job]:
    """Every job, by code (jobs are visible to everyone who may view the registry)."""
    return Job.objects.select_related("custom_grid").order_by("code")
