"""Job pages: the list, the job page with its base screening and map, create/edit for managers,
and the export of the chosen bases and check marks (CSV, GeoJSON) for field controllers.

Views parse input and render; writes go through :mod:`registry.services.jobs`, the screening
through :mod:`registry.services.screening` (the same calls the API and the command make), cached per
job and registry state by :mod:`registry.services.screening.cache` so the page, the API and the exports share it.
"""

from __future__ import annotations

import csv
import io
import json

from django import forms
from django.contrib import messages
from django.core.exceptions import ValidationError
from django.http import HttpRequest, HttpResponse, JsonResponse
from django.shortcuts import redirect, render
from django.utils.safestring import mark_safe

from registry.errors import Conflict
from registry.formatting import format_frame
from registry.geodesy import rtk, site_files
from registry.models import Job, JobStatus, RtkCombination, RtkHorizontalMeaning, VerticalDeliverable
from registry.roles import Ability
from registry.selectors.jobs import jobs_in_order
from registry.services.access import access_job_by_code
from registry.services.job_fields import REQUIRED_ON_CREATE, field_help, new_job_defaults
from registry.services.jobs import CREATE_FIELDS, JOB_PLANNING, job_create, job_update, may_plan_jobs
from registry.services.screening import ScreeningResult
from registry.services.screening.cache import job_screen_cached
from registry.services.screening.export import EXPORT_COLUMNS, export_geojson, export_rows
from registry.services.screening.present import job_answer, page_figures
from registry.web.csv_safe import spreadsheet_safe_rows
from registry.web.fieldwork_forms import AngleField
from registry.web.job_map import build_job_map, legend_rows, live_map_data
from registry.web.service_errors import ServiceErrorsMixin
from registry.web.site_draw import site_draw_data
from registry.web.views import ability_required

NUMBER_FIELDS = (
    ("epoch_yr", "Deliverable epoch (decimal year)"),
    ("tol_h_mm", "Horizontal tolerance, 95 % circle (mm)"),
    ("tol_v_mm", "Vertical tolerance, 95 % (mm)"),
    ("rtk_h_fixed_mm", "RTK horizontal, fixed part (mm)"),
    ("rtk_h_ppm", "RTK horizontal, distance part (ppm)"),
    ("rtk_v_fixed_mm", "RTK vertical, fixed part (mm)"),
    ("rtk_v_ppm", "RTK vertical, distance part (ppm)"),
    ("setup_h_mm", "Base centring per axis, 1σ (mm)"),
    ("setup_v_mm", "Base antenna height, 1σ (mm)"),
    ("rover_h_mm", "Rover pole centring per axis, 1σ (mm)"),
    ("rover_v_mm", "Rover rod height, 1σ (mm)"),
    ("assumed_rate_mm_yr", "Assumed unmodelled motion without velocity, dynamic frame (mm/yr per axis)"),
    (
        "assumed_rate_plate_fixed_mm_yr",
        "Assumed unmodelled motion without velocity, plate-fixed frame (mm/yr per axis)",
    ),
    ("max_baseline_m", "Maximum baseline (m)"),
    ("recovery_years", "A base needs a good visit within (years)"),
    ("grid_spacing_m", "Site grid spacing (m; empty: chosen from the site size)"),
)
#: The form's groups: legend, a note under it, and the fields in order.
FIELD_GROUPS = (
    ("The job", "", ["code", "name", "client", "status", "notes"]),
    (
        "The site",
        "Required, given one way: paste GeoJSON, type a point, or upload a file. The job page's map shows it.",
        ["site_geojson", "site_lat_deg", "site_lon_deg", "site_file"],
    ),
    (
        "Deliverable",
        "",
        [
            "frame_epsg",
            "epoch_yr",
            "tol_h_mm",
            "tol_v_mm",
            "grid_epsg",
            "custom_grid",
            "vertical_deliverable",
            "field_date",
        ],
    ),
    (
        "RTK error model and setup",
        "Start at the documented defaults (common practice); match them to your equipment.",
        [
            "rtk_combination",
            "rtk_h_meaning",
            "rtk_h_fixed_mm",
            "rtk_h_ppm",
            "rtk_v_fixed_mm",
            "rtk_v_ppm",
            "setup_h_mm",
            "setup_v_mm",
            "rover_h_mm",
            "rover_v_mm",
        ],
    ),
    (
        "Screening limits",
        "",
        ["assumed_rate_mm_yr", "assumed_rate_plate_fixed_mm_yr", "max_baseline_m", "recovery_years", "grid_spacing_m"],
    ),
)


def _text(label, required=False, help_text=""):
    return forms.CharField(
        label=label,
        required=required,
        help_text=help_text,
        widget=forms.TextInput(attrs={"inputmode": "decimal", "class": "num"}),
    )


class JobForm(ServiceErrorsMixin, forms.Form):
    """All fields are passed as text to the service, which converts and validates them (coded errors)."""

    code = forms.CharField(
        label="Job code",
        required=False,
        max_length=32,
        help_text="Capital letters, digits, '_', '.', '-' (e.g. J-2025-014).",
    )
    name = forms.CharField(label="Name", required=False, max_length=200)
    client = forms.CharField(label="Client", required=False, max_length=200)
    status = forms.ChoiceField(label="Status", choices=JobStatus.choices, initial=JobStatus.PLANNING)
    site_geojson = forms.CharField(
        label="The site as GeoJSON (Point or Polygon, longitude/latitude in degrees)",
        required=False,
        widget=forms.Textarea(attrs={"rows": 5, "cols": 70, "class": "mono", "spellcheck": "false"}),
        help_text=(
            "An optional third coordinate is the ellipsoidal height in the job's frame (not an orthometric "
            "height from a plan); it only feeds the base-to-site height difference."
        ),
    )
    site_lat_deg = AngleField(
        kind="lat",
        label="…or a site point: latitude",
        required=False,
        help_text="Decimal degrees or degrees minutes seconds, e.g. 45.2 or 45 12 00.0 N.",
    )
    site_lon_deg = AngleField(
        kind="lon",
        label="…and longitude",
        required=False,
        help_text="West negative, or with W: -110.6 or 110 36 00.0 W.",
    )
    site_file = forms.FileField(
        label="…or a file with the site: GeoJSON, KML or GPX",
        required=False,
        help_text=(
            "One point or one polygon (KML), one waypoint or one track or route around the site (GPX), one Point "
            "or Polygon (GeoJSON). Heights in KML and GPX files are not read (they are seldom ellipsoidal)."
        ),
        widget=forms.ClearableFileInput(attrs={"accept": ".geojson,.json,.kml,.gpx"}),
    )
    frame_epsg = _text(
        "Deliverable frame (EPSG code of a geographic 3D CRS)",
        help_text="e.g. 6319 NAD83(2011), 7912 ITRF2014, 9989 ITRF2020",
    )
    grid_epsg = _text("Deliverable grid (EPSG; empty: UTM zone chosen automatically)")
    custom_grid = _text("…or one of the office's custom grids (its code)")
    rtk_combination = forms.ChoiceField(
        label="RTK error combination", choices=RtkCombination.choices, initial=RtkCombination.ADDITIVE
    )
    rtk_h_meaning = forms.ChoiceField(
        label="The horizontal RTK figure is",
        choices=RtkHorizontalMeaning.choices,
        initial=RtkHorizontalMeaning.PER_AXIS,
        help_text="1σ per axis is the conservative reading (as 2D RMS the per-axis figure is √2 smaller); choose "
        "2D RMS only when the receiver's specification says so.",
    )
    field_date = forms.CharField(
        label="Field date (YYYY-MM-DD; empty: the day the screening is run)",
        required=False,
        help_text="Base motion relative to the site is counted from the deliverable epoch to this date.",
    )
    vertical_deliverable = forms.ChoiceField(
        label="Heights delivered",
        choices=VerticalDeliverable.choices,
        initial=VerticalDeliverable.ELLIPSOIDAL,
        required=False,
    )
    notes = forms.CharField(label="Notes", required=False, widget=forms.Textarea(attrs={"rows": 3, "cols": 70}))
    version = forms.IntegerField(widget=forms.HiddenInput, required=False)

    def __init__(self, *args, editing: bool = False, **kwargs):
        super().__init__(*args, **kwargs)
        help_texts = field_help()
        for name, label in NUMBER_FIELDS:
            self.fields[name] = _text(label, help_text=help_texts.get(name, ""))
        # The service's field order, with the point entry beside the GeoJSON site.
        order = []
        for name in CREATE_FIELDS:
            order.append(name)
            if name == "site_geojson":
                order += ["site_lat_deg", "site_lon_deg", "site_file"]
        order.append("version")
        self.order_fields(order)
        if editing:
            del self.fields["code"]
        for name in REQUIRED_ON_CREATE:
            if name in self.fields and name != "site_geojson":  # the site group says it is required, one way
                self.fields[name].marked_required = True  # shown as "required" (the service enforces it)

    def groups(self) -> list[tuple[str, str, list]]:
        """The visible fields in groups: (legend, note, bound fields); anything unlisted joins the last group."""
        placed = {n for _, _, names in FIELD_GROUPS for n in names}
        out = []
        for legend, note, names in FIELD_GROUPS:
            out.append((legend, note, [self[n] for n in names if n in self.fields]))
        rest = [self[n] for n in self.fields if n not in placed and n != "version"]
        out[-1][2].extend(rest)
        return [g for g in out if g[2]]

    def clean(self):
        data = super().clean()
        lat, lon = data.get("site_lat_deg"), data.get("site_lon_deg")
        upload = data.get("site_file")
        pasted = bool((data.get("site_geojson") or "").strip()) and "site_geojson" in self.changed_data
        point = lat is not None or lon is not None
        if "site_lat_deg" in self.errors or "site_lon_deg" in self.errors:
            return data
        if sum([pasted, point, bool(upload)]) > 1:
            raise ValidationError(
                "Give the site one way only: pasted GeoJSON, a typed point, or a file.", code="site_twice"
            )
        if point:
            if lat is None or lon is None:
                raise ValidationError(
                    "Give both latitude and longitude of the site point.", code="site_point_incomplete"
                )
            data["site_geojson"] = json.dumps({"type": "Point", "coordinates": [lon, lat]})
            self._site_given = True
        elif upload:
            if upload.size > site_files.MAX_SITE_FILE_BYTES:
                self.add_error("site_file", "The file is larger than 2 MB; a site outline needs far less.")
                return data
            try:
                geometry = site_files.site_from_file(upload.name, upload.read())
            except site_files.SiteFileError as exc:
                self.add_error("site_file", ValidationError(f"{upload.name}: {exc}", code=exc.code))
                return data
            data["site_geojson"] = json.dumps(geometry)
            self._site_given = True
        return data

    def service_data(self, *, only_changed: bool) -> dict:
        names = [n for n in self.fields if n not in ("version", "site_lat_deg", "site_lon_deg", "site_file")]
        if only_changed:
            names = [n for n in names if n in self.changed_data]
            if getattr(self, "_site_given", False) and "site_geojson" not in names:
                names.append("site_geojson")
        data = {}
        for n in names:
            value = self.cleaned_data.get(n)
            data[n] = value.strip() if isinstance(value, str) else value
        for n in ("grid_epsg", "custom_grid", "grid_spacing_m", "field_date"):
            if n in data and data[n] == "":
                data[n] = None
        if not only_changed:
            data = {k: v for k, v in data.items() if v not in ("", None) or k in ("client", "notes")}
        return data


def _initial(job: Job) -> dict:
    initial = {
        name: getattr(job, name)
        for name in (
            "name",
            "client",
            "status",
            "frame_epsg",
            "grid_epsg",
            "rtk_combination",
            "rtk_h_meaning",
            "vertical_deliverable",
            "notes",
        )
    }
    initial["field_date"] = "" if job.field_date is None else job.field_date.isoformat()
    initial["grid_epsg"] = "" if job.grid_epsg is None else str(job.grid_epsg)
    initial["custom_grid"] = job.custom_grid_id or ""
    initial["frame_epsg"] = str(job.frame_epsg)
    for name, _ in NUMBER_FIELDS:
        value = getattr(job, name)
        initial[name] = "" if value is None else f"{value:g}"
    initial["site_geojson"] = json.dumps(job.site_geojson)
    initial["version"] = job.version
    return initial


# ----------------------------------------------------------------------------- pages


@ability_required(Ability.VIEW)
def job_list(request: HttpRequest) -> HttpResponse:
    rows = [
        {
            "job": job,
            "frame": format_frame(job.frame_epsg),
            "site_kind": (job.site_geojson or {}).get("type", "?"),
            "answer": job_answer(job_screen_cached(actor=request.user, code=job.code)),
        }
        for job in jobs_in_order()
    ]
    return render(request, "registry/job_list.html", {"rows": rows, "can_plan": may_plan_jobs(request.user)})


#: Usable candidates shown before the "show all" disclosure.
RANKED_SHOWN = 25


def _grouped(value: float) -> str:
    """A whole number with thin-space digit groups (ISO 80000-1), e.g. ``2 337 499``.

    >>> _grouped(2337499.4), _grouped(10000.0), _grouped(950.0)
    ('2\u2009337\u2009499', '10\u2009000', '950')
    """
    return f"{round(value):,d}".replace(",", "\u2009")


def _screening_context(result: ScreeningResult) -> dict:
    figures = page_figures(result)
    usable_rows = figures.pop("usable_rows")
    job_map = build_job_map(result)
    area_m2 = result.grid.area_m2
    return {
        "result": result,
        **figures,
        "usable_rows": usable_rows[:RANKED_SHOWN],
        "more_usable_rows": usable_rows[RANKED_SHOWN:],
        "ranked_shown": RANKED_SHOWN,
        "usable_count": len(usable_rows),
        "excluded_count": len(figures["excluded_rows"]),
        "map_svg": mark_safe(job_map.svg),  # built from escaped values in job_map
        "job_map": job_map,
        "map_data": live_map_data(result, job_map),  # the interactive panel (static/registry/jobmap.js)
        "map_span_km": job_map.span_m / 1000.0,
        "legend": legend_rows(result.settings.tol_h_mm),
        "frame_label": result.frame_label,
        "boundary_count": int((~result.grid.is_cell).sum()),
        "area_text": f"{_grouped(area_m2)} m² ({area_m2 / 10_000:.1f} ha)",
        "max_baseline_text": f"{_grouped(result.settings.max_baseline_m)} m",
        "site_heights_count": len(result.settings.site.heights_m),
        "dh_warn_m": rtk.HEIGHT_DIFFERENCE_WARN_M,
    }


@ability_required(Ability.VIEW)
def job_page(request: HttpRequest, code: str) -> HttpResponse:
    job = access_job_by_code(request.user, code)
    result = job_screen_cached(actor=request.user, code=code)
    context = {
        "job": job,
        "can_plan": may_plan_jobs(request.user),
        "answer": job_answer(result),
        **_screening_context(result),
    }
    return render(request, "registry/job_detail.html", context)


@ability_required(JOB_PLANNING)
def job_new(request: HttpRequest) -> HttpResponse:
    if request.method == "POST":
        form = JobForm(request.POST, request.FILES)
        if form.is_valid():
            try:
                job = job_create(actor=request.user, data=form.service_data(only_changed=False))
            except ValidationError as exc:
                form.add_service_error(exc)
            else:
                messages.success(request, f"Job {job.code} created (version {job.version}).")
                return redirect("web:job-detail", code=job.code)
    else:
        defaults = new_job_defaults()
        form = JobForm(initial={k: (f"{v:g}" if isinstance(v, float) else v) for k, v in defaults.items()})
    status = 400 if request.method == "POST" else 200
    context = {"form": form, "job": None, "draw": site_draw_data()}
    return render(request, "registry/job_form.html", context, status=status)


@ability_required(JOB_PLANNING)
def job_edit(request: HttpRequest, code: str) -> HttpResponse:
    job = access_job_by_code(request.user, code, ability=JOB_PLANNING)
    initial = _initial(job)
    conflict = None
    status = 200
    if request.method == "POST":
        form = JobForm(request.POST, request.FILES, editing=True, initial=initial)
        if form.is_valid():
            changes = form.service_data(only_changed=True)
            if not changes:
                messages.info(request, f"Nothing to save: job {job.code} already holds these values.")
                return redirect("web:job-detail", code=job.code)
            loaded = form.cleaned_data.get("version")
            try:
                job = job_update(actor=request.user, code=job.code, expected_version=loaded, changes=changes)
            except ValidationError as exc:
                form.add_service_error(exc)
                status = 400
            except Conflict as exc:
                details = exc.details or {}
                stored = details.get("version", {}).get("theirs")
                conflict = {
                    "message": exc.message,
                    "rows": [{"field": k, **v} for k, v in details.items() if k != "version"],
                    "loaded_version": loaded,
                    "stored_version": stored,
                }
                status = 409
                data = request.POST.copy()
                if stored is not None:
                    data["version"] = str(stored)
                form = JobForm(data, editing=True, initial=initial)
                form.is_valid()
            else:
                messages.success(request, f"Job {job.code} saved (version {job.version}).")
                return redirect("web:job-detail", code=job.code)
        else:
            status = 400
    else:
        form = JobForm(initial=initial, editing=True)
    context = {"form": form, "job": job, "conflict": conflict, "draw": site_draw_data()}
    return render(request, "registry/job_form.html", context, status=status)


# ----------------------------------------------------------------------------- exports
# What the export holds is decided by registry.services.screening.export; these views only write it out.


@ability_required(Ability.VIEW)
def job_export_csv(request: HttpRequest, code: str) -> HttpResponse:
    result = job_screen_cached(actor=request.user, code=code)
    buf = io.StringIO()
    writer = csv.DictWriter(buf, fieldnames=EXPORT_COLUMNS, lineterminator="\r\n")
    writer.writeheader()
    writer.writerows(spreadsheet_safe_rows(export_rows(result)))  # names/notes never run as formulas
    response = HttpResponse(buf.getvalue(), content_type="text/csv; charset=utf-8")
    response["Content-Disposition"] = f'attachment; filename="{code}-control.csv"'
    return response


@ability_required(Ability.VIEW)
def job_export_geojson(request: HttpRequest, code: str) -> HttpResponse:
    result = job_screen_cached(actor=request.user, code=code)
    body = export_geojson(result, name=code)
    response = JsonResponse(body, json_dumps_params={"ensure_ascii": False, "indent": 1})
    response["Content-Type"] = "application/geo+json"
    response["Content-Disposition"] = f'attachment; filename="{code}-control.geojson"'
    return response


@ability_required(Ability.VIEW)
def job_notes(request: HttpRequest, code: str) -> HttpResponse:
    """A job's notes in full (the job page shows the first part)."""
    job = access_job_by_code(request.user, code)
    back = redirect("web:job-detail", code=job.code).url
    return render(
        request, "registry/full_text.html", {"title": "Notes", "subject": job.code, "text": job.notes, "back": back}
    )
