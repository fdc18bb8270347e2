"""Forms of the fieldwork, position, status and nearby pages.

They parse what a person types (dates, UTC times, DMS or decimal angles, sigmas in mm)
into the plain values the services take; the services validate again, and their coded
``ValidationError`` is put back on the matching form field (``add_service_error``).
"""

from __future__ import annotations

import datetime as dt
from typing import Any

from django import forms
from django.core.exceptions import ValidationError

from registry.geodesy import dms
from registry.models import AntennaHeightKind, Finding, MarkStatus, OccupationMethod, Stability
from registry.selectors import nearby_filters as lim
from registry.services import position_rules
from registry.services.fieldwork import OCCUPATION_FIELDS
from registry.web.service_errors import ServiceErrorsMixin

#: Frames offered on the propose form even before any position uses them (shared contracts).
DEFAULT_FRAMES = (7912, 9989, 6319)
OTHER_FRAME = "other"


class MultipleFileInput(forms.ClearableFileInput):
    allow_multiple_selected = True


class MultipleFileField(forms.FileField):
    """Several files in one input (Django's documented pattern); empty → []."""

    def __init__(self, *args, **kwargs):
        kwargs.setdefault("widget", MultipleFileInput())
        kwargs.setdefault("required", False)
        super().__init__(*args, **kwargs)

    def clean(self, data, initial=None):
        single = super().clean
        if isinstance(data, list | tuple):
            return [single(d, initial) for d in data if d]
        return [single(data, initial)] if data else []


def parse_utc(text: str, field: str) -> dt.datetime:
    """'YYYY-MM-DD HH:MM[:SS]' or 'YYYY-MM-DDTHH:MM' read as UTC; an explicit offset is honoured."""
    try:
        value = dt.datetime.fromisoformat(text.strip())
    except ValueError:
        raise ValidationError(
            "Enter a date and time in UTC as YYYY-MM-DD HH:MM (seconds optional).", code="invalid_datetime"
        ) from None
    if value.tzinfo is None:
        value = value.replace(tzinfo=dt.UTC)
    return value.astimezone(dt.UTC)


class AngleField(forms.CharField):
    """A latitude or longitude typed as decimal degrees or D M S (``registry.geodesy.dms.parse_angle``)."""

    def __init__(self, *, kind: str, **kwargs):
        self.kind = kind
        kwargs.setdefault("max_length", 40)
        super().__init__(**kwargs)

    def clean(self, value):
        text = super().clean(value)
        if text in (None, ""):
            return None
        try:
            return dms.parse_angle(text, kind=self.kind)
        except dms.AngleParseError as exc:
            raise ValidationError(str(exc), code=exc.code) from None


# ----------------------------------------------------------------------------- visit


PHOTO_SLOTS = 4


class VisitForm(ServiceErrorsMixin, forms.Form):
    """A visit. The date defaults to today and the visitor to the signed-in user; what was found has no
    default (a false "intact" is worse than a missing answer). Each photo has its own caption."""

    visited_on = forms.DateField(
        label="Date of the visit", widget=forms.DateInput(attrs={"type": "date"}), help_text="YYYY-MM-DD."
    )
    finding = forms.ChoiceField(
        label="What was found",
        choices=[("", "— choose what the crew found —"), *Finding.choices],
        error_messages={"required": "Say what the crew found at the mark."},
    )
    visitor = forms.CharField(max_length=120, required=False, help_text="Who visited (name or crew).")
    notes = forms.CharField(widget=forms.Textarea(attrs={"rows": 4}), required=False)
    photos = MultipleFileField(
        label="More photos (without captions)",
        help_text="Optional; several files allowed. Each is stored with its SHA-256 checksum.",
    )
    service_field_map = {"file": "photos", "kind": "photos"}

    def __init__(self, *args, user=None, **kwargs):
        super().__init__(*args, **kwargs)
        import datetime as _dt

        from django.utils import timezone

        if not self.is_bound:
            self.initial.setdefault("visited_on", timezone.now().astimezone(_dt.UTC).date())
            if user is not None and getattr(user, "is_authenticated", False):
                self.initial.setdefault("visitor", user.get_full_name() or user.get_username())
        photos = self.fields.pop("photos")
        for i in range(1, PHOTO_SLOTS + 1):
            self.fields[f"photo_{i}"] = forms.FileField(label=f"Photo {i}", required=False)
            self.fields[f"caption_{i}"] = forms.CharField(
                label=f"Caption of photo {i}",
                max_length=200,
                required=False,
                widget=forms.TextInput(attrs={"placeholder": "what the photo shows, e.g. looking north at the disk"}),
            )
        self.fields["photos"] = photos

    def clean(self):
        data = super().clean()
        for i in range(1, PHOTO_SLOTS + 1):
            if data.get(f"caption_{i}") and not data.get(f"photo_{i}"):
                self.add_error(f"photo_{i}", ValidationError("A caption was given without its photo.", code="no_photo"))
        return data

    def main_fields(self) -> list:
        return [self[n] for n in ("visited_on", "finding", "visitor", "notes")]

    def extra_photo_fields(self) -> list:
        return [self["photos"]]

    def photo_slots(self) -> list[tuple[Any, Any]]:
        """(photo, caption) bound fields, for the page's photo rows."""
        return [(self[f"photo_{i}"], self[f"caption_{i}"]) for i in range(1, PHOTO_SLOTS + 1)]

    def photo_pairs(self) -> list[tuple[Any, str]]:
        """(file, caption) for every photo sent: the captioned slots first, then the extra ones."""
        d = self.cleaned_data
        pairs = [(d[f"photo_{i}"], d.get(f"caption_{i}", "")) for i in range(1, PHOTO_SLOTS + 1) if d.get(f"photo_{i}")]
        pairs += [(f, "") for f in d.get("photos") or []]
        return pairs

    def visit_data(self) -> dict[str, Any]:
        d = self.cleaned_data
        return {k: d[k] for k in ("visited_on", "finding", "visitor", "notes")}


# ----------------------------------------------------------------------------- occupation


class OccupationForm(ServiceErrorsMixin, forms.Form):
    method = forms.ChoiceField(choices=OccupationMethod.choices)
    start_utc = forms.CharField(label="Start (UTC)", help_text="YYYY-MM-DD HH:MM[:SS], in UTC.", max_length=40)
    end_utc = forms.CharField(label="End (UTC)", help_text="YYYY-MM-DD HH:MM[:SS], in UTC.", max_length=40)
    observer = forms.CharField(max_length=120, required=False)
    receiver = forms.CharField(max_length=120, required=False, help_text="Make, model, serial.")
    antenna = forms.CharField(max_length=120, required=False, help_text="Make, model, serial (and radome).")
    antenna_height_measured_m = forms.FloatField(
        label="Antenna height as measured (m)", required=False, help_text="0 to 10 m, as read on the tape or rod."
    )
    antenna_height_kind = forms.ChoiceField(
        label="Measured", choices=AntennaHeightKind.choices, initial=AntennaHeightKind.VERTICAL
    )
    antenna_radius_m = forms.FloatField(
        label="Antenna radius r (m)",
        required=False,
        help_text="Slant only: horizontal radius of the slant-measure point, from the antenna's documentation.",
    )
    arp_offset_m = forms.FloatField(
        label="Offset Δh to the ARP (m)",
        required=False,
        help_text="Slant only: vertical offset from the slant-measure point to the antenna reference point; "
        "negative when the ARP is below it (the usual case). h_ARP = √(s² − r²) + Δh.",
    )
    notes = forms.CharField(widget=forms.Textarea(attrs={"rows": 3}), required=False)
    file_kind = forms.ChoiceField(
        label="Kind of the attached files",
        choices=[("rinex", "RINEX observation file"), ("other", "other file")],
        initial="rinex",
        required=False,
    )
    files = MultipleFileField(label="Files", help_text="Optional; several files allowed (RINEX or other).")
    rinex_file = forms.FileField(
        label="RINEX observation file",
        required=False,
        help_text="Version 2.11, 3.x or 4.x, plain or gzip (.gz). Hatanaka-compressed files: decompress them first.",
    )
    held_rinex = forms.CharField(required=False, widget=forms.HiddenInput)
    service_field_map = {"file": "files", "kind": "file_kind"}
    GROUPS = {
        "session_fields": ("method", "start_utc", "end_utc", "observer", "receiver", "antenna", "notes"),
        "height_fields": ("antenna_height_measured_m", "antenna_height_kind", "antenna_radius_m", "arp_offset_m"),
        "file_fields": ("file_kind", "files"),
        "rinex_fields": ("rinex_file",),
    }

    def groups(self) -> dict[str, list]:
        return {name: [self[f] for f in fields] for name, fields in self.GROUPS.items()}

    def clean(self):
        data = super().clean()
        for name in ("start_utc", "end_utc"):
            if data.get(name):
                try:
                    data[name] = parse_utc(data[name], name)
                except ValidationError as exc:
                    self.add_error(name, exc)
        return data

    def occupation_data(self) -> dict[str, Any]:
        d = self.cleaned_data
        # the service's fields; the result position is linked by the publish step, not typed here
        return {k: d.get(k) for k in OCCUPATION_FIELDS if k != "result_position_id"}


# ----------------------------------------------------------------------------- position


# The bounds of services.position_rules, in the form's units (the service checks them again).
SIGMA_MAX_MM = position_rules.SIGMA_MAX_M * 1000.0
VELOCITY_MAX_MM_YR = position_rules.VELOCITY_MAX_M_YR * 1000.0


class PositionForm(ServiceErrorsMixin, forms.Form):
    frame_choice = forms.ChoiceField(label="Frame")
    frame_other = forms.IntegerField(
        label="Other frame (EPSG code)",
        required=False,
        min_value=1024,
        help_text="Used when 'other' is chosen above: the EPSG code of a geographic 3D CRS.",
    )
    epoch_yr = forms.FloatField(label="Coordinate epoch (decimal year)", help_text="e.g. 2024.250")
    lat = AngleField(kind="lat", label="Latitude", help_text="Decimal degrees (45.2) or D M S (45 12 03.51234 N).")
    lon = AngleField(kind="lon", label="Longitude", help_text="Decimal degrees (-110.6) or D M S (110 36 00.0 W).")
    h_m = forms.FloatField(label="Ellipsoidal height h (m)")
    # Upper bounds from services.position_rules (σ ≤ 100 m, |v| ≤ 1 m/yr); they keep the squaring into m² finite.
    sigma_e_mm = forms.FloatField(
        label="σ east (mm)", min_value=0.0, max_value=SIGMA_MAX_MM, help_text="One standard deviation."
    )
    sigma_n_mm = forms.FloatField(label="σ north (mm)", min_value=0.0, max_value=SIGMA_MAX_MM)
    sigma_u_mm = forms.FloatField(label="σ up (mm)", min_value=0.0, max_value=SIGMA_MAX_MM)
    vel_e_mm_yr = forms.FloatField(
        label="Velocity east (mm/yr)",
        required=False,
        min_value=-VELOCITY_MAX_MM_YR,
        max_value=VELOCITY_MAX_MM_YR,
        help_text="Optional: all three or none.",
    )
    vel_n_mm_yr = forms.FloatField(
        label="Velocity north (mm/yr)", required=False, min_value=-VELOCITY_MAX_MM_YR, max_value=VELOCITY_MAX_MM_YR
    )
    vel_u_mm_yr = forms.FloatField(
        label="Velocity up (mm/yr)", required=False, min_value=-VELOCITY_MAX_MM_YR, max_value=VELOCITY_MAX_MM_YR
    )
    source = forms.CharField(max_length=200, help_text="Campaign, adjustment or occupation the solution comes from.")
    note = forms.CharField(widget=forms.Textarea(attrs={"rows": 2}), required=False)
    service_field_map = {
        "frame_epsg": "frame_other",
        "lat_deg": "lat",
        "lon_deg": "lon",
        "cov_ee_m2": "sigma_e_mm",
        "cov_nn_m2": "sigma_n_mm",
        "cov_uu_m2": "sigma_u_mm",
        "cov_en_m2": "sigma_e_mm",
        "cov_eu_m2": "sigma_e_mm",
        "cov_nu_m2": "sigma_n_mm",
        "vel_e_m_yr": "vel_e_mm_yr",
        "vel_n_m_yr": "vel_n_mm_yr",
        "vel_u_m_yr": "vel_u_mm_yr",
    }

    GROUPS = {
        "frame_fields": ("frame_choice", "frame_other", "epoch_yr"),
        "coord_fields": ("lat", "lon", "h_m"),
        "sigma_fields": ("sigma_e_mm", "sigma_n_mm", "sigma_u_mm"),
        "velocity_fields": ("vel_e_mm_yr", "vel_n_mm_yr", "vel_u_mm_yr"),
        "source_fields": ("source", "note"),
    }

    def groups(self) -> dict[str, list]:
        return {name: [self[f] for f in fields] for name, fields in self.GROUPS.items()}

    def __init__(self, *args, frames_in_use: list[int] | tuple[int, ...] = (), **kwargs):
        super().__init__(*args, **kwargs)
        from registry.formatting import format_frame

        codes = list(dict.fromkeys([*frames_in_use, *DEFAULT_FRAMES]))
        self.fields["frame_choice"].choices = [(str(c), format_frame(c)) for c in codes] + [
            (OTHER_FRAME, "other (enter the EPSG code below)")
        ]

    def clean(self):
        data = super().clean()
        choice = data.get("frame_choice")
        if choice == OTHER_FRAME:
            if data.get("frame_other") is None and "frame_other" not in self.errors:
                self.add_error("frame_other", ValidationError("Enter the EPSG code of the frame.", code="required"))
            data["frame_epsg"] = data.get("frame_other")
        elif choice:
            data["frame_epsg"] = int(choice)
        for name in ("sigma_e_mm", "sigma_n_mm", "sigma_u_mm"):
            if data.get(name) == 0.0:
                self.add_error(name, ValidationError("A sigma of zero is not a real uncertainty.", code="zero_sigma"))
        return data

    def position_data(self) -> dict[str, Any]:
        d = self.cleaned_data
        out = {
            "frame_epsg": d["frame_epsg"],
            "epoch_yr": d["epoch_yr"],
            "lat_deg": d["lat"],
            "lon_deg": d["lon"],
            "h_m": d["h_m"],
            "cov_ee_m2": (d["sigma_e_mm"] / 1000.0) ** 2,
            "cov_nn_m2": (d["sigma_n_mm"] / 1000.0) ** 2,
            "cov_uu_m2": (d["sigma_u_mm"] / 1000.0) ** 2,
            "source": d["source"],
            "note": d.get("note", ""),
        }
        for axis in "enu":
            v = d.get(f"vel_{axis}_mm_yr")
            if v is not None:
                out[f"vel_{axis}_m_yr"] = v / 1000.0
        return out


class DecisionForm(forms.Form):
    note = forms.CharField(
        widget=forms.Textarea(attrs={"rows": 3}),
        required=False,
        help_text=(
            "The reason (required to reject or withdraw, and to publish against a possible movement; "
            "recorded in the history)."
        ),
    )
    # The published position shown on the page when the manager decided ("none": nothing was published).
    compared_with = forms.CharField(widget=forms.HiddenInput, required=False)

    @staticmethod
    def compared_with_value(position) -> str:
        return "none" if position is None else str(position.pk)

    def compared_with_id(self):
        """The position id the page showed, None for "none", or the service's default when absent."""
        from registry.services.positions import AS_PROPOSED

        raw = (self.cleaned_data.get("compared_with") or "").strip()
        if raw == "none":
            return None
        return int(raw) if raw.isdigit() else AS_PROPOSED


# ----------------------------------------------------------------------------- mark status


class MarkStatusForm(ServiceErrorsMixin, forms.Form):
    version = forms.IntegerField(widget=forms.HiddenInput, min_value=1)
    # Not "suspect": visits set it, and a clearance or a new position ends it (services.suspect).
    status = forms.ChoiceField(
        label="New status", choices=[c for c in MarkStatus.choices if c[0] != MarkStatus.SUSPECT]
    )
    note = forms.CharField(
        widget=forms.Textarea(attrs={"rows": 3}),
        required=False,
        help_text="Required to retire a mark or record it destroyed: what was found, by whom, when.",
    )


class ClearSuspectForm(ServiceErrorsMixin, forms.Form):
    version = forms.IntegerField(widget=forms.HiddenInput, min_value=1)
    note = forms.CharField(
        label="Why the mark can be used again",
        widget=forms.Textarea(attrs={"rows": 3}),
        required=False,  # the service asks for it (note_required), so the message is the same everywhere
        help_text="Required: e.g. who re-checked it in the field, when, and against what.",
    )


# ----------------------------------------------------------------------------- nearby


class NearbyForm(forms.Form):
    lat = AngleField(kind="lat", label="Latitude", help_text="Decimal degrees or D M S with N/S.")
    lon = AngleField(kind="lon", label="Longitude", help_text="Decimal degrees or D M S with E/W.")
    radius_km = forms.FloatField(
        label="Radius (km)", min_value=lim.RADIUS_MIN_KM, max_value=lim.RADIUS_MAX_KM, initial=5.0
    )
    limit = forms.IntegerField(label="At most", min_value=1, max_value=lim.ASKED_LIMIT_MAX, initial=lim.DEFAULT_LIMIT)
    usable = forms.ChoiceField(
        label="Show",
        required=False,
        choices=[("usable", "usable marks only"), ("all", "all marks, including those not for use")],
        initial="usable",
    )
    status = forms.ChoiceField(label="Status", required=False, choices=[("", "any status"), *MarkStatus.choices])
    stability = forms.ChoiceField(
        label="Stability", required=False, choices=[("", "any stability"), *Stability.choices]
    )
    intact_visit_within_yr = forms.FloatField(
        label="Found intact within (years)",
        required=False,
        min_value=lim.INTACT_VISIT_MIN_YR,
        max_value=lim.INTACT_VISIT_MAX_YR,
    )
    frame_epsg = forms.IntegerField(
        label="Published in frame (EPSG)",
        required=False,
        min_value=lim.FRAME_EPSG_MIN,
        help_text="e.g. 7912, 9989, 6319.",
    )
    accuracy_class_max_m = forms.FloatField(
        label="Horizontal accuracy at most (m)",
        required=False,
        min_value=lim.ACCURACY_MIN_M,
        max_value=lim.ACCURACY_MAX_M,
        help_text="FGDC network accuracy (95 %) of a published position, in the frame above if given; e.g. 0.02.",
    )

    def search_args(self) -> dict[str, Any]:
        d = self.cleaned_data
        args = {"lat_deg": d["lat"], "lon_deg": d["lon"], "radius_m": d["radius_km"] * 1000.0, "limit": d["limit"]}
        for key in ("status", "stability", "intact_visit_within_yr", "frame_epsg", "accuracy_class_max_m"):
            if d.get(key) not in (None, ""):
                args[key] = d[key]
        if self.usable_only():
            args["usable_only"] = True  # the selector applies the usability rule before the limit
        return args

    def usable_only(self) -> bool:
        return (self.cleaned_data.get("usable") or "usable") == "usable"
