"""System checks for the environment the registry relies on.

Each check has a stable id (``registry.E0xx`` / ``registry.W0xx``) and a hint.
Modules add their own checks here; ids are never reused.
"""

from __future__ import annotations

from django.core.checks import Error, Tags, Warning, register
from django.db import connections


@register(Tags.database, deploy=True)
def check_postgis(app_configs=None, databases=None, **kwargs):
    """registry.E001: on PostgreSQL the PostGIS extension must be installed."""
    errors = []
    for alias in databases or []:
        conn = connections[alias]
        if conn.vendor != "postgresql":
            continue
        try:
            with conn.cursor() as cur:
                cur.execute("SELECT extversion FROM pg_extension WHERE extname = 'postgis'")
                row = cur.fetchone()
                cur.execute("SELECT count(*) FROM pg_available_extensions WHERE name = 'postgis'")
                available = cur.fetchone()[0] > 0
                major = conn.pg_version // 10000
        except Exception as exc:  # database unreachable: Django reports that itself
            errors.append(Warning(f"Could not query PostGIS on '{alias}': {exc}", id="registry.W001"))
            continue
        if row is None:
            if available:
                hint = (
                    f"As a database superuser run: psql -d {conn.settings_dict['NAME']} -c 'CREATE EXTENSION "
                    "postgis' (deploy/postgres/provision.sql does this; the application role cannot)."
                )
            else:
                hint = (
                    f"The server has no PostGIS package: install postgresql-{major}-postgis-3 on the "
                    "database server, then create the extension (deploy/postgres/provision.sql)."
                )
            errors.append(Error(f"PostGIS is not installed in database '{alias}'.", hint=hint, id="registry.E001"))
    return errors


# --- PROJ data, PROJ network, geoid grids (geodesy area; ids registry.E010–E019, W010–W019) ---


@register()
def check_proj(app_configs=None, **kwargs):
    """registry.E010/E011/E012, W010–W012: PROJ database, frame operations, network off, geoid grids."""
    import os

    from django.conf import settings

    from registry.geodesy.heights import EGM96_FALLBACK
    from registry.geodesy.projsetup import find_grid, proj_status

    out = []
    status = proj_status()
    if status["proj_db"] is None:
        out.append(
            Error(
                "PROJ's database (proj.db) was not found on PROJ's search path.",
                hint=f"Search path: {os.pathsep.join(status['search_dirs']) or '(empty)'}. Reinstall pyproj "
                "(its wheel carries proj.db) or set PROJ_DATA to a folder holding proj.db.",
                id="registry.E010",
            )
        )
    else:
        from registry.geodesy.frames import FrameTransformError, operation_for

        try:
            operation_for("EPSG:9989", "EPSG:7912")
        except FrameTransformError as exc:
            out.append(
                Error(
                    f"PROJ cannot transform ITRF2020 to ITRF2014: {exc}",
                    hint=f"PROJ {status['proj_version']} with pyproj {status['pyproj_version']} is expected "
                    "(requirements.txt); an old proj.db lacks the time-dependent ITRF transformations.",
                    id="registry.E012",
                )
            )
    if status["network_enabled"]:
        out.append(
            Warning(
                "PROJ network access (CDN grids) is on; the registry expects it off so that results never "
                "depend on what a remote server returns.",
                hint="Unset PROJ_NETWORK (the app turns it off at start-up; something turned it on again).",
                id="registry.W010",
            )
        )
    reg = settings.REGISTRY
    geoid_dir = reg.get("GEOID_DIR") or ""
    model = (reg.get("GEOID_MODEL") or "").strip()
    if model and geoid_dir and not os.path.isdir(geoid_dir):
        out.append(
            Warning(
                f"The geoid grid folder {geoid_dir} (REGISTRY_GEOID_DIR) does not exist.",
                hint="Create it and put the office's geoid grid there.",
                id="registry.W011",
            )
        )
    if model and find_grid(model, dirs=[geoid_dir]) is None:
        out.append(
            Error(
                f"The configured geoid grid '{model}' (REGISTRY_GEOID_MODEL) was not found.",
                hint=f"Copy it into {geoid_dir} (REGISTRY_GEOID_DIR) or correct the file name.",
                id="registry.E011",
            )
        )
    geoid_frame = str(reg.get("GEOID_FRAME") or "").strip()
    if model and not geoid_frame:
        out.append(
            Error(
                "REGISTRY_GEOID_MODEL is set but REGISTRY_GEOID_FRAME is not: the registry cannot know which "
                "frame's ellipsoidal heights the office geoid model applies to, so it computes no orthometric "
                "heights with it.",
                hint="Set REGISTRY_GEOID_FRAME to the EPSG code of that geographic 3D frame (e.g. 6319 for a model "
                "fitted on NAD83(2011)); the model's documentation states it.",
                id="registry.E014",
            )
        )
    elif geoid_frame:
        from registry.geodesy.frames import FrameTransformError, frame_info

        try:
            frame_info(int(geoid_frame.upper().removeprefix("EPSG:")))
        except (FrameTransformError, ValueError) as exc:
            out.append(
                Error(
                    f"REGISTRY_GEOID_FRAME={geoid_frame!r} is not a geographic 3D frame: {exc}",
                    hint="Give the EPSG code of a geographic 3D CRS (latitude, longitude, ellipsoidal height).",
                    id="registry.E015",
                )
            )
    plate = (reg.get("PLATE") or "").strip()
    if plate.upper() == "AUTO":
        plate = ""
    if plate:
        from registry.geodesy.platemotion import PlateMotionError
        from registry.geodesy.platemotion import plate as plate_of

        try:
            plate_of(plate)
        except PlateMotionError as exc:
            out.append(
                Error(
                    f"REGISTRY_PLATE: {exc}",
                    hint="Set REGISTRY_PLATE to AUTO (each point's plate from its location), to the plate code of "
                    "the office's area, or empty to apply no plate model.",
                    id="registry.E013",
                )
            )
    # Without an office model the labelled EGM96 fallback is used (by design, no warning); without
    # that grid too there are no orthometric heights at all.
    if not model and find_grid(EGM96_FALLBACK.grid, dirs=[geoid_dir]) is None:
        out.append(
            Warning(
                "No geoid grid is available: neither an office model (REGISTRY_GEOID_MODEL) nor the EGM96 "
                "fallback (egm96_15.gtx), so no orthometric heights can be computed.",
                hint="Install the national geoid grid into REGISTRY_GEOID_DIR and set REGISTRY_GEOID_MODEL; "
                "or, for an approximate fallback only, apt-get install proj-data.",
                id="registry.W012",
            )
        )
    return out


# --- basemap tiles for the job map (web area; ids registry.W020–W029) ---


@register()
def check_basemap(app_configs=None, **kwargs):
    """registry.W020: REGISTRY_BASEMAP_URL, when set, is an http(s) template with {z}, {x} and {y}."""
    from django.conf import settings

    from registry.web.basemap import basemap_url_problems

    url = settings.REGISTRY.get("BASEMAP_URL") or ""
    problems = basemap_url_problems(url)
    if not problems:
        return []
    return [
        Warning(
            f"REGISTRY_BASEMAP_URL is not a usable tile template ({'; '.join(problems)}); the job map is drawn "
            "without a basemap.",
            hint="Use an XYZ template such as https://tiles.example.org/{z}/{x}/{y}.png (and set "
            "REGISTRY_BASEMAP_ATTRIBUTION to the provider's attribution), or leave it empty for no basemap.",
            id="registry.W020",
        )
    ]


# --- database roles and the audit trail (infrastructure area; ids registry.W030–W039) ---


@register(Tags.database, deploy=True)
def check_audit_role(app_configs=None, databases=None, **kwargs):
    """registry.W030: in production the application's login must not own or be able to rewrite the audit table."""
    from django.conf import settings

    from registry.dbroles import audit_table_risks

    if not getattr(settings, "PRODUCTION", False):
        return []
    warnings = []
    for alias in databases or []:
        conn = connections[alias]
        if conn.vendor != "postgresql":
            continue
        try:
            risks = audit_table_risks(conn)
        except Exception:  # unreachable, or not migrated yet: reported elsewhere
            continue
        if risks:
            warnings.append(
                Warning(
                    f"The application's database login on '{alias}' could rewrite the audit trail: "
                    + "; ".join(risks)
                    + ".",
                    hint="Run the application as the runtime role and migrations as the owner role "
                    "(deploy/README.md, 'Database roles'; deploy/postgres/provision.sql).",
                    id="registry.W030",
                )
            )
    return warnings


# --- documents: fonts, signing secret, page size (documents area; ids registry.E030–E039, W040–W049) ---


@register()
def check_documents(app_configs=None, **kwargs):
    """registry.E030 report fonts; E031 signing secret in production; E032 page size; W040 public address."""
    from django.conf import settings

    from registry.reports.layout import FONT_DIRS, FONT_FILES, font_path

    messages = []
    missing = [f for f in FONT_FILES.values() if font_path(f) is None]
    if missing:
        messages.append(
            Error(
                f"Fonts for documents are missing: {', '.join(missing)} (looked in {', '.join(FONT_DIRS)}).",
                hint="Install the Debian package fonts-dejavu-core (deploy/test.sh and demo.sh do).",
                id="registry.E030",
            )
        )
    reg = settings.REGISTRY
    if getattr(settings, "PRODUCTION", False) and len(reg.get("SIGNING_KEY_SECRET") or "") < 32:
        messages.append(
            Error(
                "REGISTRY_SIGNING_KEY_SECRET is unset or shorter than 32 characters: signing keys cannot be stored "
                "safely.",
                hint='Generate one: python3 -c "import secrets; print(secrets.token_urlsafe(48))"; keep a copy in '
                "the office's safe (see deploy/README.md).",
                id="registry.E031",
            )
        )
    if str(reg.get("PAGE_SIZE", "A4")).lower() not in ("a4", "letter"):
        messages.append(
            Error(
                f"REGISTRY_PAGE_SIZE is {reg.get('PAGE_SIZE')!r}; documents are printed on A4 or Letter.",
                hint="Set REGISTRY_PAGE_SIZE=A4 or REGISTRY_PAGE_SIZE=Letter.",
                id="registry.E032",
            )
        )
    public = str(reg.get("PUBLIC_URL") or "")
    if getattr(settings, "PRODUCTION", False) and not public.startswith("https://"):
        messages.append(
            Warning(
                f"REGISTRY_PUBLIC_URL is {public!r}: the QR codes of documents and the revocation list address in "
                "certificates should name the registry's public https address.",
                hint="Set REGISTRY_PUBLIC_URL=https://registry.example.org (no trailing slash).",
                id="registry.W040",
            )
        )
    return messages
