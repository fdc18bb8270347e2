"""Django settings for the control-mark registry.

Everything that differs between a laptop demo and a production office comes
from the environment (see ``deploy/README.md`` for the full list):

``REGISTRY_PRODUCTION``  1 for production mode (DEBUG off, secure cookies, secrets required)
``DATABASE_URL``         e.g. ``postgres://registry@127.0.0.1:5432/registry``; unset: SQLite in ``var/``
``REGISTRY_SECRET_KEY``  Django's secret key (required in production)
``REGISTRY_ALLOWED_HOSTS`` comma-separated host names (required in production)
``REGISTRY_DATA_DIR``    where the SQLite file, uploads and generated files live (default ``var/``)
``REGISTRY_GEOID_DIR``   folder holding the office's geoid grids (added to PROJ's search path)
``REGISTRY_BASEMAP_URL`` optional XYZ tile URL for map panels; empty: no basemap
``REGISTRY_BASEMAP_ATTRIBUTION`` the tile provider's attribution text, shown under the map
``REGISTRY_CACHE_MAX_ENTRIES`` entries of each process's read cache (default 3000, about 50 MB at most)
"""

from __future__ import annotations

import os
from pathlib import Path

import dj_database_url
from django.core.exceptions import ImproperlyConfigured

from registry.envconfig import env_bool, env_list, env_secret

BASE_DIR = Path(__file__).resolve().parent.parent
PRODUCTION = env_bool("REGISTRY_PRODUCTION", False)
DEBUG = env_bool("REGISTRY_DEBUG", not PRODUCTION)
DATA_DIR = Path(os.environ.get("REGISTRY_DATA_DIR", BASE_DIR / "var"))

SECRET_KEY = env_secret(
    "REGISTRY_SECRET_KEY",
    production=PRODUCTION,
    dev_default="dev-only-insecure-key-never-use-in-production-0123456789abcdef",
    # Production refuses what Django's check --deploy only warns about (security.W009).
    min_length=50,
    min_unique=5,
    forbidden_prefix="django-insecure-",
)
ALLOWED_HOSTS = env_list("REGISTRY_ALLOWED_HOSTS", ["127.0.0.1", "localhost", "testserver"], required=PRODUCTION)
CSRF_TRUSTED_ORIGINS = env_list("REGISTRY_CSRF_TRUSTED_ORIGINS", [])

INSTALLED_APPS = [
    "django.contrib.admin",
    "django.contrib.auth",
    "django.contrib.contenttypes",
    "django.contrib.sessions",
    "django.contrib.messages",
    "django.contrib.staticfiles",
    "django.contrib.humanize",
    "rest_framework",
    "rest_framework.authtoken",
    "drf_spectacular",
    "drf_spectacular_sidecar",  # Swagger UI files served from our own static files (no CDN, works offline)
    "django_tasks",
    "django_tasks_db",
    "registry.apps.RegistryConfig",
    # The session table naming each session's user (registry/sessions/), read with that user in one query.
    "registry.sessions.apps.SignInSessionsConfig",
]

MIDDLEWARE = [
    "django.middleware.security.SecurityMiddleware",
    # A strict Content-Security-Policy on every answer (registry/web/csp.py).
    "registry.web.csp.ContentSecurityPolicyMiddleware",
    "whitenoise.middleware.WhiteNoiseMiddleware",
    "django.contrib.sessions.middleware.SessionMiddleware",
    "django.middleware.common.CommonMiddleware",
    "django.middleware.csrf.CsrfViewMiddleware",
    # Django's, taking the user read with the session (registry/auth_backend.py, registry/sessions/).
    "registry.auth_backend.AuthenticationMiddleware",
    # Idempotency-Key on API writes: a retried write is answered once (registry/api/idempotency.py).
    "registry.api.idempotency.IdempotencyMiddleware",
    "django.contrib.messages.middleware.MessageMiddleware",
    "django.middleware.clickjacking.XFrameOptionsMiddleware",
    # Lag-tolerant reads (lists, searches, public verification) from the streaming replica when one is
    # configured (REGISTRY_REPLICA_URL; registry/dbrouter.py). Last, so that it wraps the view itself.
    "registry.dbrouter.ReplicaReadsMiddleware",
]

ROOT_URLCONF = "registry.urls"
WSGI_APPLICATION = "registry.wsgi.application"

TEMPLATES = [
    {
        "BACKEND": "django.template.backends.django.DjangoTemplates",
        "DIRS": [BASE_DIR / "templates"],
        "APP_DIRS": True,
        "OPTIONS": {
            "context_processors": [
                "django.template.context_processors.request",
                "django.contrib.auth.context_processors.auth",
                "django.contrib.messages.context_processors.messages",
                "registry.web.context.registry_context",
            ],
            "libraries": {"registry_format": "registry.web.templatetags.registry_format"},
        },
    }
]

_default_sqlite = f"sqlite:///{DATA_DIR / 'registry.sqlite3'}"
DATABASES = {
    "default": dj_database_url.parse(
        os.environ.get("DATABASE_URL", "") or _default_sqlite,
        conn_max_age=int(os.environ.get("REGISTRY_DB_CONN_MAX_AGE", "60" if PRODUCTION else "0")),
    )
}
# PostgreSQL roles (registry/dbroles.py, deploy/README.md "Database roles"): REGISTRY_DB_ROLE is
# assumed after connecting (SET ROLE), e.g. the owner role for "manage.py migrate".
if os.environ.get("REGISTRY_DB_ROLE", "").strip() and "postgresql" in DATABASES["default"]["ENGINE"]:
    DATABASES["default"].setdefault("OPTIONS", {})["assume_role"] = os.environ["REGISTRY_DB_ROLE"].strip()
if DATABASES["default"]["ENGINE"] == "django.db.backends.sqlite3":
    DATABASES["default"].setdefault("OPTIONS", {})
    DATABASES["default"]["OPTIONS"].update({"timeout": 20, "transaction_mode": "IMMEDIATE"})
# A PostgreSQL streaming replica of the same database for reads that tolerate a little lag
# (registry/dbrouter.py; deploy/README.md "Running it for many offices"). Empty: the primary does all.
_replica_url = os.environ.get("REGISTRY_REPLICA_URL", "").strip()
if _replica_url:
    DATABASES["replica"] = dj_database_url.parse(_replica_url, conn_max_age=DATABASES["default"]["CONN_MAX_AGE"])
    # A replica that does not answer must not hold a request up for long: the primary serves instead.
    DATABASES["replica"].setdefault("OPTIONS", {}).setdefault("connect_timeout", 3)
    # Tests: the replica alias reads the test database itself.
    DATABASES["replica"]["TEST"] = {"MIRROR": "default"}
DATABASE_ROUTERS = ["registry.dbrouter.ReplicaRouter"]
DEFAULT_AUTO_FIELD = "django.db.models.BigAutoField"

#: Django's model backend, reading a user's permissions in one query (registry/auth_backend.py).
AUTHENTICATION_BACKENDS = [
    "registry.auth_backend.RegistryModelBackend",
    "django.contrib.auth.backends.ModelBackend",  # keeps sessions signed in through it valid; never asked for perms
]
#: Each process's own memory (registry/selectors/read_cache.py: entries are keyed on the newest audit row,
#: so a cache shared between processes is not needed for correctness). Django's default of 300 entries is
#: smaller than the working set of a busy office (a mark page keeps three: its rows, its sheets and its
#: rendered body, about 45 kB together), and a least-recently-used cache cycled over more entries than it
#: holds answers nothing from memory; 3,000 entries are some 50 MB per process at most.
CACHES = {
    "default": {
        "BACKEND": "django.core.cache.backends.locmem.LocMemCache",
        "OPTIONS": {"MAX_ENTRIES": int(os.environ.get("REGISTRY_CACHE_MAX_ENTRIES", "3000"))},
    }
}
#: Django's database sessions in a table naming each session's user, read with that user in one query
#: (registry/sessions/).
SESSION_ENGINE = "registry.sessions"
AUTH_PASSWORD_VALIDATORS = [
    {"NAME": "django.contrib.auth.password_validation.UserAttributeSimilarityValidator"},
    {"NAME": "django.contrib.auth.password_validation.MinimumLengthValidator"},
    {"NAME": "django.contrib.auth.password_validation.CommonPasswordValidator"},
    {"NAME": "django.contrib.auth.password_validation.NumericPasswordValidator"},
]

LANGUAGE_CODE = "en"
TIME_ZONE = "UTC"
USE_I18N = False
USE_TZ = True

STATIC_URL = "static/"
STATIC_ROOT = DATA_DIR / "static"
STATICFILES_DIRS = [BASE_DIR / "registry" / "web" / "static"]
MEDIA_ROOT = Path(os.environ.get("REGISTRY_MEDIA_ROOT", DATA_DIR / "media"))
MEDIA_URL = "media/"
# Uploads and signed documents: the local media folder (default), or with REGISTRY_STORAGE=s3 an
# S3-compatible object store shared by several application servers and workers (django-storages).
STORAGE_KIND = os.environ.get("REGISTRY_STORAGE", "local").strip().lower() or "local"
if STORAGE_KIND not in ("local", "s3"):
    raise ImproperlyConfigured(f"REGISTRY_STORAGE must be 'local' or 's3', not {STORAGE_KIND!r}.")
if STORAGE_KIND == "s3":
    _s3_bucket = os.environ.get("REGISTRY_S3_BUCKET", "").strip()
    if not _s3_bucket:
        raise ImproperlyConfigured("REGISTRY_STORAGE=s3 needs REGISTRY_S3_BUCKET (the bucket's name).")
    _default_storage = {
        "BACKEND": "registry.storage.SharedObjectStorage",
        "OPTIONS": {
            "bucket_name": _s3_bucket,
            "endpoint_url": os.environ.get("REGISTRY_S3_ENDPOINT_URL", "").strip() or None,
            "region_name": os.environ.get("REGISTRY_S3_REGION", "").strip() or None,
            # Credentials: these two, or boto3's usual sources (AWS_* variables, instance roles).
            "access_key": os.environ.get("REGISTRY_S3_ACCESS_KEY_ID", "").strip() or None,
            "secret_key": os.environ.get("REGISTRY_S3_SECRET_ACCESS_KEY", "").strip() or None,
            "location": os.environ.get("REGISTRY_S3_PREFIX", "").strip().strip("/"),
            "addressing_style": os.environ.get("REGISTRY_S3_ADDRESSING", "path").strip() or "path",
            # Objects are private; every download passes the application's sign-in and role check.
            "default_acl": None,
            "querystring_auth": True,
            # Never replace an object: a second file of the same name gets a new name.
            "file_overwrite": False,
        },
    }
else:
    _default_storage = {"BACKEND": "django.core.files.storage.FileSystemStorage"}
STORAGES = {
    "default": _default_storage,
    "staticfiles": {
        "BACKEND": (
            "whitenoise.storage.CompressedManifestStaticFilesStorage"
            if PRODUCTION
            else "django.contrib.staticfiles.storage.StaticFilesStorage"
        )
    },
}
# Development and tests: WhiteNoise looks static files up per request (no collectstatic, no
# "No directory at var/static" warning). Production serves the collected, hashed files.
WHITENOISE_AUTOREFRESH = not PRODUCTION
# ... and also with REGISTRY_DEBUG=0 (the demo runs without the debug page, as production does).
WHITENOISE_USE_FINDERS = not PRODUCTION
FILE_UPLOAD_MAX_MEMORY_SIZE = 5 * 1024 * 1024
DATA_UPLOAD_MAX_MEMORY_SIZE = 20 * 1024 * 1024

LOGIN_URL = "web:login"
LOGIN_REDIRECT_URL = "web:mark-list"
LOGOUT_REDIRECT_URL = "web:login"

REST_FRAMEWORK = {
    # Token first: an unauthenticated request then gets 401 with "WWW-Authenticate: Token".
    "DEFAULT_AUTHENTICATION_CLASSES": [
        "rest_framework.authentication.TokenAuthentication",
        "rest_framework.authentication.SessionAuthentication",
    ],
    "DEFAULT_PERMISSION_CLASSES": ["registry.api.permissions.IsViewer"],
    # JSON only: DRF's browsable HTML pages use inline scripts and styles, which our
    # Content-Security-Policy refuses (registry/web/csp.py); /api/docs/ is the readable view.
    "DEFAULT_RENDERER_CLASSES": ["rest_framework.renderers.JSONRenderer"],
    # DRF's negotiation, its choice remembered per Accept header (registry/api/negotiation.py).
    "DEFAULT_CONTENT_NEGOTIATION_CLASS": "registry.api.negotiation.RememberedContentNegotiation",
    "DEFAULT_PAGINATION_CLASS": "registry.api.pagination.RegistryPagination",
    # JSON with limits: nesting depth and text that is not Unicode are 400s (registry/api/parsers.py).
    "DEFAULT_PARSER_CLASSES": [
        "registry.api.parsers.SafeJSONParser",
        "rest_framework.parsers.FormParser",
        "rest_framework.parsers.MultiPartParser",
    ],
    "PAGE_SIZE": 100,
    "DEFAULT_SCHEMA_CLASS": "drf_spectacular.openapi.AutoSchema",
    "EXCEPTION_HANDLER": "registry.api.errors.api_exception_handler",
}
SPECTACULAR_SETTINGS = {
    "TITLE": "Control-mark registry API",
    "DESCRIPTION": (
        "Marks, positions, conversions and base screening. Coordinates always carry their frame "
        "(EPSG code) and coordinate epoch (decimal year). Rounding: latitude/longitude to 9 decimal "
        "places of a degree, metres to 3 decimals, sigmas and accuracies in millimetres to 1 decimal."
    ),
    "VERSION": "1",
    "SERVE_INCLUDE_SCHEMA": False,
    # /api/docs/: Swagger UI from drf-spectacular-sidecar's vendored files, under our strict CSP.
    "SWAGGER_UI_DIST": "SIDECAR",
    "SWAGGER_UI_FAVICON_HREF": "SIDECAR",
    "REDOC_DIST": "SIDECAR",
    "POSTPROCESSING_HOOKS": [
        "drf_spectacular.hooks.postprocess_schema_enums",
        # The error answers every operation can give, and the Idempotency-Key header on writes.
        "registry.api.schema.add_error_responses",
    ],
    # Several enumerations share field names (a mark's and a job's "status"...): name them once.
    "ENUM_NAME_OVERRIDES": {
        "MarkStatusEnum": "registry.models.MarkStatus",
        "JobStatusEnum": "registry.models.JobStatus",
        "PositionStateEnum": "registry.models.PositionState",
        "GridMethodEnum": "registry.models.GridMethod",
        "OccupationMethodEnum": "registry.models.OccupationMethod",
        "GridUnitEnum": "registry.models.GridUnit",
        "UsabilityStateEnum": "registry.services.usability.STATE_CODES",
    },
}

# Domain settings. Defaults documented in README.md (common practice where so marked).
REGISTRY = {
    # Assumed unmodelled horizontal/vertical rate for marks without a velocity (mm/yr per axis).
    # Used in dynamic frames (ITRF): what is left after the mark's velocity or the plate model (intraplate
    # deformation, plate-model residuals; a few mm/yr is common practice). A new job's default.
    "ASSUMED_RATE_MM_YR": float(os.environ.get("REGISTRY_ASSUMED_RATE_MM_YR", "2.0")),
    # The same in plate-fixed frames (NAD83(2011), ETRF/ETRS89 realisations...): the plate's rigid motion is
    # already taken out, so only the residual motion of the plate interior remains, typically below 1 mm/yr
    # horizontally (common practice). Where marks subside or deform, give them velocities. A new job's default.
    "ASSUMED_RATE_PLATE_FIXED_MM_YR": float(os.environ.get("REGISTRY_ASSUMED_RATE_PLATE_FIXED_MM_YR", "0.5")),
    # Stated 1σ (mm) of the office geoid model (REGISTRY_GEOID_MODEL) for the relative geoid height between a
    # base and a rover over a few km; added to the vertical budget of jobs whose vertical deliverable is
    # orthometric. Hybrid national models state about 1–2 cm (common practice); use the model's own figure.
    "GEOID_SIGMA_MM": float(os.environ.get("REGISTRY_GEOID_SIGMA_MM", "15")),
    # Plate rule of the ITRF2020 plate motion model (Altamimi et al. 2023) for moving a position without
    # its own velocity to another epoch in a dynamic frame (ITRF): "AUTO" chooses each point's plate from
    # its location (registry/geodesy/plates.py); a plate code (NOAM, EURA, AUST...) is the office's plate,
    # and a point located on another plate is refused. Development and the demo default to "AUTO";
    # production defaults to none, so that an office decides: set AUTO or your office's plate.
    # Empty: no model; such positions keep a loud warning and are excluded from base screening.
    "PLATE": os.environ.get("REGISTRY_PLATE", "" if PRODUCTION else "AUTO").strip().upper(),
    # Folder with the office's own geoid grids (added to PROJ's data search path).
    "GEOID_DIR": os.environ.get("REGISTRY_GEOID_DIR", str(DATA_DIR / "grids")),
    # Default geoid model file (office grid); EGM96 (egm96_15.gtx) is the labelled fallback.
    "GEOID_MODEL": os.environ.get("REGISTRY_GEOID_MODEL", ""),
    # EPSG code of the geographic 3D frame whose ellipsoidal heights the office model's N refers to
    # (e.g. 6319 for a hybrid model fitted on NAD83(2011)); required with GEOID_MODEL (system check E014).
    "GEOID_FRAME": os.environ.get("REGISTRY_GEOID_FRAME", "").strip(),
    # Optional XYZ tile template (https://…/{z}/{x}/{y}.png) drawn faded under the job map, loaded by the
    # user's browser; checked at start (registry.W020). Empty: no basemap. Attribution shown in the caption.
    "BASEMAP_URL": os.environ.get("REGISTRY_BASEMAP_URL", "").strip(),
    "BASEMAP_ATTRIBUTION": os.environ.get("REGISTRY_BASEMAP_ATTRIBUTION", "").strip(),
    # Movement check (registry/services/movement.py): level α of the one global 3D test, the power for the
    # smallest detectable movement (Baarda 1968), and the office's threshold for that detectable movement
    # ("horizontal,vertical" in mm): above it the check says it could not have seen such a movement.
    "MOVEMENT_LEVEL": float(os.environ.get("REGISTRY_MOVEMENT_LEVEL", "0.05")),
    "MOVEMENT_POWER": float(os.environ.get("REGISTRY_MOVEMENT_POWER", "0.80")),
    "MOVEMENT_DETECTABLE_MM": tuple(
        float(v) for v in os.environ.get("REGISTRY_MOVEMENT_DETECTABLE_MM", "20,40").split(",")[:2]
    ),
    "MAX_BASELINE_M": float(os.environ.get("REGISTRY_MAX_BASELINE_M", "10000")),
    # A RINEX header whose approximate position is farther than this from the mark's published position
    # is refused (registry/services/rinex.py explains the 100 m default).
    "RINEX_MAX_OFFSET_M": float(os.environ.get("REGISTRY_RINEX_MAX_OFFSET_M", "100")),
    # How long an uploaded file waits between its preview and its confirmation (registry/services/held_uploads.py).
    "HELD_UPLOAD_MINUTES": float(os.environ.get("REGISTRY_HELD_UPLOAD_MINUTES", "30")),
    "RECOVERY_YEARS": float(os.environ.get("REGISTRY_RECOVERY_YEARS", "10")),
    # Production: uploaded files go out through nginx's internal location of this name (X-Accel-Redirect)
    # after the sign-in and role check (registry/web/views.py media_file; deploy/nginx/registry.conf).
    "MEDIA_ACCEL_PREFIX": os.environ.get("REGISTRY_MEDIA_ACCEL_PREFIX", "/_protected_media/"),
    # Sign-in throttle (registry/services/signin.py): failures per account / per client address within
    # SIGNIN_LOCK_MINUTES before sign-in is paused for that long.
    "SIGNIN_ACCOUNT_FAILURES": int(os.environ.get("REGISTRY_SIGNIN_ACCOUNT_FAILURES", "5")),
    "SIGNIN_ADDRESS_FAILURES": int(os.environ.get("REGISTRY_SIGNIN_ADDRESS_FAILURES", "20")),
    "SIGNIN_LOCK_MINUTES": float(os.environ.get("REGISTRY_SIGNIN_LOCK_MINUTES", "15")),
    # Request header (as Django's META key) holding the client's address set by the proxy; production
    # default X-Real-IP, which deploy/nginx/registry.conf sets. Empty: the connection's address.
    "CLIENT_IP_HEADER": os.environ.get("REGISTRY_CLIENT_IP_HEADER", "HTTP_X_REAL_IP" if PRODUCTION else "").strip(),
    # PostgreSQL role the application logs in as in production; after each migrate run as the owner it
    # gets rows only, and INSERT/SELECT on the audit trail (registry/dbroles.py). Empty: no grants.
    "DB_RUNTIME_ROLE": os.environ.get("REGISTRY_DB_RUNTIME_ROLE", "").strip(),
    # Documents (station description sheets, control reports; registry/reports/).
    "OFFICE_NAME": os.environ.get("REGISTRY_OFFICE_NAME", "Survey office").strip(),
    # PNG or JPEG drawn in the documents' heading; empty: none.
    "OFFICE_LOGO": os.environ.get("REGISTRY_OFFICE_LOGO", "").strip(),
    "PAGE_SIZE": os.environ.get("REGISTRY_PAGE_SIZE", "A4").strip(),
    # Frames (EPSG codes, comma-separated) a sheet prints; empty: every published position of the mark.
    "SHEET_FRAMES": os.environ.get("REGISTRY_SHEET_FRAMES", "").strip(),
    # The office's grid (EPSG code of a projected CRS); empty: the UTM zone of each mark.
    "GRID_EPSG": os.environ.get("REGISTRY_GRID_EPSG", "").strip(),
    # The frame of a GeoJSON export when none is asked for (one frame per GeoJSON file; EPSG code of the
    # office's ITRF-aligned geographic 3D frame). The GeoPackage export holds every frame, a layer each.
    # Stream uploaded files through Django even without DEBUG (deploy/demo.sh: no nginx in front);
    # production leaves it off and lets nginx send them (X-Accel-Redirect).
    "MEDIA_BY_DJANGO": env_bool("REGISTRY_MEDIA_BY_DJANGO", False),
    "EXPORT_FRAME": int(os.environ.get("REGISTRY_EXPORT_FRAME", "7912") or "7912"),
    # The office geoid model's name as documents and pages print it (default: its file name).
    "GEOID_NAME": os.environ.get("REGISTRY_GEOID_NAME", "").strip(),
    # Statement style for check-point residuals uploaded with a control report: nssda or asprs2023.
    "REPORT_STATEMENT_STYLE": os.environ.get("REGISTRY_REPORT_STATEMENT_STYLE", "nssda").strip(),
    # Address the QR codes of documents open (the public verification page); no trailing slash.
    "PUBLIC_URL": os.environ.get("REGISTRY_PUBLIC_URL", "http://127.0.0.1:8000").strip().rstrip("/"),
    # Encrypts signing keys at rest (required in production; see deploy/README.md).
    "SIGNING_KEY_SECRET": os.environ.get(
        "REGISTRY_SIGNING_KEY_SECRET", "" if PRODUCTION else "dev-only-signing-key-secret-never-in-production"
    ),
    # Streaming replica (REGISTRY_REPLICA_URL): after a write, the same client reads from the primary this
    # long; a replica further behind than MAX_LAG is not used; one that failed is retried after RETRY.
    "REPLICA_PIN_SECONDS": float(os.environ.get("REGISTRY_REPLICA_PIN_SECONDS", "10")),
    "REPLICA_MAX_LAG_SECONDS": float(os.environ.get("REGISTRY_REPLICA_MAX_LAG_SECONDS", "30")),
    "REPLICA_RETRY_SECONDS": float(os.environ.get("REGISTRY_REPLICA_RETRY_SECONDS", "15")),
    # The few plain SQL reads of every signed-in request prepared once per PostgreSQL connection
    # (registry/dbprepared.py). Turn off behind a pooler that gives each transaction another server
    # connection (PgBouncer's transaction mode).
    "DB_PREPARED_STATEMENTS": env_bool("REGISTRY_DB_PREPARED_STATEMENTS", True),
    # Background workers (manage.py task_worker; registry/services/workers.py): a task whose worker was
    # killed runs again, up to MAX_ATTEMPTS runs in all, then fails; workers look every RECOVER seconds.
    "TASK_MAX_ATTEMPTS": int(os.environ.get("REGISTRY_TASK_MAX_ATTEMPTS", "3")),
    "TASK_RECOVER_SECONDS": float(os.environ.get("REGISTRY_TASK_RECOVER_SECONDS", "30")),
    # Public verification page and revocation list: at most this many requests per client address per
    # minute (0: no limit), counted in the database so that every application server shares the count.
    "VERIFY_RATE_PER_MIN": int(os.environ.get("REGISTRY_VERIFY_RATE_PER_MIN", "30")),
    "CRL_RATE_PER_MIN": int(os.environ.get("REGISTRY_CRL_RATE_PER_MIN", "120")),
}

# Background work (document builds) through Django's tasks interface (the django-tasks backport on
# Django 5.2). "database": the ORM queue of django-tasks-db, worked by ``manage.py db_worker`` (any number
# of workers, on any machine that reaches the database); "immediate": run in the request (tests). Another
# backend of the same interface (RQ, Celery) is a settings change: REGISTRY_TASK_BACKEND=dotted.path.
_TASK_BACKENDS = {
    "database": "django_tasks_db.DatabaseBackend",
    "immediate": "django_tasks.backends.immediate.ImmediateBackend",
}
_task_backend = os.environ.get("REGISTRY_TASK_BACKEND", "database").strip() or "database"
#: Marks files up to this size are imported in the request; larger ones by the task worker.
REGISTRY_IMPORT_INLINE_BYTES = int(os.environ.get("REGISTRY_IMPORT_INLINE_BYTES", str(256 * 1024)))
TASKS = {"default": {"BACKEND": _TASK_BACKENDS.get(_task_backend, _task_backend)}}

LOGGING = {
    "version": 1,
    "disable_existing_loggers": False,
    "handlers": {"console": {"class": "logging.StreamHandler"}},
    "root": {"handlers": ["console"], "level": os.environ.get("REGISTRY_LOG_LEVEL", "WARNING")},
}

if PRODUCTION:
    SESSION_COOKIE_SECURE = True
    CSRF_COOKIE_SECURE = True
    SECURE_SSL_REDIRECT = env_bool("REGISTRY_SSL_REDIRECT", True)
    SECURE_PROXY_SSL_HEADER = ("HTTP_X_FORWARDED_PROTO", "https")
    SECURE_HSTS_SECONDS = int(os.environ.get("REGISTRY_HSTS_SECONDS", "31536000"))
    SECURE_HSTS_INCLUDE_SUBDOMAINS = True
    SECURE_HSTS_PRELOAD = True
    SECURE_CONTENT_TYPE_NOSNIFF = True
    X_FRAME_OPTIONS = "DENY"
