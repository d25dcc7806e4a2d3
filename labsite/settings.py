"""Tauline settings: one file, driven by environment variables.

With nothing set, a fresh checkout runs on an embedded SQLite database under ``var/`` and runs
background tasks in-process. Every variable is listed, with a one-line comment, in ``.env.example``.
"""

from __future__ import annotations

from datetime import timedelta
from pathlib import Path

import dj_database_url
import django_stubs_ext
from csp.constants import NONCE, NONE, SELF
from django.core.exceptions import ImproperlyConfigured
from kombu import Queue

from labsite.env import env_bool, env_int, env_list, env_str

# Lets generic classes such as ModelAdmin[Model] be subscripted at run time, for type checking.
django_stubs_ext.monkeypatch()

BASE_DIR = Path(__file__).resolve().parent.parent
VAR_DIR = BASE_DIR / "var"

DEBUG = env_bool("DJANGO_DEBUG", True)

_INSECURE_DEV_KEY = "insecure-dev-only-key-never-use-in-production"
SECRET_KEY = env_str("DJANGO_SECRET_KEY")
if not SECRET_KEY:
    if not DEBUG:
        raise ImproperlyConfigured(
            "DJANGO_SECRET_KEY is not set. It is required when DJANGO_DEBUG is off: set it to a long "
            "random string (for example the output of "
            "`python -c 'import secrets; print(secrets.token_urlsafe(50))'`), "
            "or set DJANGO_SECRET_KEY_FILE to a file holding it."
        )
    SECRET_KEY = _INSECURE_DEV_KEY

ALLOWED_HOSTS = env_list(
    "DJANGO_ALLOWED_HOSTS", ["127.0.0.1", "localhost", "[::1]"] if DEBUG else []
)
CSRF_TRUSTED_ORIGINS = env_list("DJANGO_CSRF_TRUSTED_ORIGINS", [])

INSTALLED_APPS = [
    "django.contrib.admin",
    "django.contrib.auth",
    "django.contrib.contenttypes",
    "django.contrib.sessions",
    "django.contrib.messages",
    "django.contrib.staticfiles",
    "rest_framework",
    "knox",
    "django_filters",
    "drf_spectacular",
    "drf_spectacular_sidecar",
    "testing.apps.TestingConfig",
    "reports.apps.ReportsConfig",
    "axes",
    # Field-level history of lab records (who, when, before/after, reason).
    "simple_history",
    "labsite.security.apps.SecurityConfig",
]

MIDDLEWARE = [
    "django.middleware.security.SecurityMiddleware",
    # Content-Security-Policy on every response; pages put the per-response nonce on their scripts.
    "csp.middleware.CSPMiddleware",
    # Serves collected static files from gunicorn itself, so a deployment needs no extra web server.
    "whitenoise.middleware.WhiteNoiseMiddleware",
    # Refuses (413) a body over the upload cap before CSRF or a view reads it.
    "labsite.security.uploads.UploadLimitMiddleware",
    "django.contrib.sessions.middleware.SessionMiddleware",
    "django.middleware.common.CommonMiddleware",
    "django.middleware.csrf.CsrfViewMiddleware",
    "django.contrib.auth.middleware.AuthenticationMiddleware",
    "django.contrib.messages.middleware.MessageMiddleware",
    "django.middleware.clickjacking.XFrameOptionsMiddleware",
    # Signs out idle and over-long sessions (needs request.user).
    "labsite.security.sessions.SessionLimitsMiddleware",
    # Lets model history record the signed-in user of the request.
    "simple_history.middleware.HistoryRequestMiddleware",
    # django-axes: turns a locked-out sign-in into the lockout page; keep it last.
    "axes.middleware.AxesMiddleware",
]

ROOT_URLCONF = "labsite.urls"
WSGI_APPLICATION = "labsite.wsgi.application"

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
            ],
        },
    },
]

# --- Database -------------------------------------------------------------------------------
_DEFAULT_SQLITE = f"sqlite:///{VAR_DIR / 'tauline.sqlite3'}"
DATABASE_URL = env_str("DATABASE_URL") or _DEFAULT_SQLITE
try:
    DATABASES = {"default": dj_database_url.parse(DATABASE_URL, conn_max_age=60)}
except ValueError as exc:  # an unknown scheme or a malformed URL
    raise ImproperlyConfigured(f"DATABASE_URL is not a valid database URL: {exc}") from exc
if DATABASES["default"]["ENGINE"] == "django.db.backends.sqlite3":
    DATABASES["default"]["CONN_MAX_AGE"] = 0
    DATABASES["default"].setdefault("OPTIONS", {})["timeout"] = 20

DEFAULT_AUTO_FIELD = "django.db.models.BigAutoField"

# --- Background tasks -------------------------------------------------------------------------
REDIS_URL = env_str("REDIS_URL")
CELERY_TASK_ALWAYS_EAGER = not REDIS_URL  # no broker configured: run tasks in-process
CELERY_TASK_EAGER_PROPAGATES = True
CELERY_BROKER_URL = REDIS_URL or "memory://"
CELERY_RESULT_BACKEND = REDIS_URL or None
CELERY_TASK_ACKS_LATE = True
CELERY_TASK_REJECT_ON_WORKER_LOST = True
CELERY_WORKER_PREFETCH_MULTIPLIER = 1
CELERY_TASK_SOFT_TIME_LIMIT = env_int("TAULINE_TASK_SOFT_TIME_LIMIT", 600, minimum=1)
CELERY_TASK_TIME_LIMIT = CELERY_TASK_SOFT_TIME_LIMIT + 60
# Keep time limits well below the broker's visibility timeout, or a long task is redelivered.
CELERY_BROKER_TRANSPORT_OPTIONS = {
    "visibility_timeout": 3 * CELERY_TASK_TIME_LIMIT,
    "socket_connect_timeout": 1,
    "socket_timeout": 5,
    # Publishing gives up after one reconnect attempt instead of retrying forever: the outbox keeps
    # the job and the relay sends it later.
    "max_retries": 1,
    "interval_start": 0,
    "interval_step": 0.2,
    "interval_max": 0.5,
}
# A claimed run holds a lease this long (renewed as it progresses); a run whose worker died is
# re-queued by the sweeper once its lease has run out.
TAULINE_RUN_LEASE_SECONDS = env_int("TAULINE_RUN_LEASE_SECONDS", 60, minimum=1)
# A queued run whose message was published this long ago without being claimed is published again.
TAULINE_RUN_REPUBLISH_SECONDS = env_int("TAULINE_RUN_REPUBLISH_SECONDS", 120, minimum=1)
# How often each worker's heartbeat thread marks the worker alive and runs the outbox relay.
TAULINE_WORKER_HEARTBEAT_SECONDS = env_int("TAULINE_WORKER_HEARTBEAT_SECONDS", 5, minimum=1)
# The manager's dashboard figures are kept this long in the (Redis) cache shared by the web
# workers, and recomputed at once when a sample is added, edited or moved; 0 turns it off.
# Off by default without Redis (one process: nothing to share).
TAULINE_DASHBOARD_CACHE_SECONDS = env_int(
    "TAULINE_DASHBOARD_CACHE_SECONDS", 60 if REDIS_URL else 0, minimum=0
)
CELERY_BROKER_CONNECTION_TIMEOUT = 1.0
CELERY_BROKER_CONNECTION_RETRY_ON_STARTUP = True
# A web request publishes once and gives up fast when the broker is down; the outbox keeps the job.
CELERY_TASK_PUBLISH_RETRY = False
CELERY_REDIS_SOCKET_CONNECT_TIMEOUT = 1
CELERY_REDIS_SOCKET_TIMEOUT = 5
CELERY_RESULT_EXPIRES = 3600
# Three queues; a plain `celery worker` consumes all of them, or dedicate workers with -Q computation
# (reductions and fits) and -Q reports (PDF rendering and signing).
CELERY_TASK_DEFAULT_QUEUE = "celery"
CELERY_TASK_QUEUES = [Queue("celery"), Queue("computation"), Queue("reports")]
CELERY_TASK_ROUTES = {
    "tauline.run_computation": {"queue": "computation"},
    "tauline.relay_outbox": {"queue": "computation"},
    "reports.*": {"queue": "reports"},
}
CELERY_TASK_SERIALIZER = "json"
CELERY_ACCEPT_CONTENT = ["json"]

if REDIS_URL:
    CACHES = {
        "default": {"BACKEND": "django.core.cache.backends.redis.RedisCache", "LOCATION": REDIS_URL}
    }
else:
    CACHES = {"default": {"BACKEND": "django.core.cache.backends.locmem.LocMemCache"}}

# --- Auth -------------------------------------------------------------------------------------
AUTH_PASSWORD_VALIDATORS = [
    {"NAME": "django.contrib.auth.password_validation.UserAttributeSimilarityValidator"},
    {"NAME": "django.contrib.auth.password_validation.MinimumLengthValidator"},
    {"NAME": "django.contrib.auth.password_validation.CommonPasswordValidator"},
    {"NAME": "django.contrib.auth.password_validation.NumericPasswordValidator"},
]
# django-axes checks the lockout first; Django's backend checks the password.
AUTHENTICATION_BACKENDS = [
    "labsite.security.backends.LockoutBackend",
    # Django's password backend; it loads the user's lab profile with the user.
    "labsite.security.backends.PasswordBackend",
]
# Sign-in lockout per user name (known or not, so a lockout reveals nothing) and, separately, per
# client address (one address trying many names): the attempt that reaches the limit locks; the
# correct password is refused while locked. Every failure is kept in the access-failure log and
# every sign-in in the access log.
AXES_FAILURE_LIMIT = env_int("TAULINE_LOGIN_FAILURE_LIMIT", 10, minimum=1)
AXES_LOCK_OUT_AT_FAILURE = True
AXES_LOCKOUT_PARAMETERS = ["username", "ip_address"]
TAULINE_LOGIN_LOCKOUT_MINUTES = env_int("TAULINE_LOGIN_LOCKOUT_MINUTES", 30, minimum=1)
AXES_COOLOFF_TIME = timedelta(minutes=TAULINE_LOGIN_LOCKOUT_MINUTES)
AXES_RESET_ON_SUCCESS = True
AXES_ENABLE_ACCESS_FAILURE_LOG = True
AXES_LOCKOUT_CALLABLE = "labsite.security.lockout.lockout_response"
# The address logged with each attempt: the socket's, or with TAULINE_PROXY_COUNT reverse proxies
# in front, the one they put in X-Forwarded-For (never trusted without a proxy: it can be forged).
_PROXY_COUNT = env_int("TAULINE_PROXY_COUNT", 0, minimum=0)
AXES_IPWARE_PROXY_COUNT = _PROXY_COUNT or None
AXES_IPWARE_META_PRECEDENCE_ORDER = (
    ["HTTP_X_FORWARDED_FOR", "REMOTE_ADDR"] if _PROXY_COUNT else ["REMOTE_ADDR"]
)
# Session limits: signed out after this long without a request, and in any case this long after
# signing in (the cookie expires then too).
TAULINE_SESSION_IDLE_MINUTES = env_int("TAULINE_SESSION_IDLE_MINUTES", 60, minimum=1)
TAULINE_SESSION_ABSOLUTE_HOURS = env_int("TAULINE_SESSION_ABSOLUTE_HOURS", 12, minimum=1)
SESSION_COOKIE_AGE = TAULINE_SESSION_ABSOLUTE_HOURS * 3600
LOGIN_URL = "login"
LOGIN_REDIRECT_URL = "home"
LOGOUT_REDIRECT_URL = "login"

# --- Internationalisation ---------------------------------------------------------------------
LANGUAGE_CODE = "en-gb"
TIME_ZONE = env_str("TAULINE_TIME_ZONE", "UTC")
USE_I18N = True
USE_TZ = True

# --- Audit trail -------------------------------------------------------------------------------
# Change reasons of any length (the default column is 100 characters).
SIMPLE_HISTORY_HISTORY_CHANGE_REASON_USE_TEXT_FIELD = True
# No "revert to this version" in the admin: every change goes through the services' rules.
SIMPLE_HISTORY_REVERT_DISABLED = True

# --- Files ------------------------------------------------------------------------------------
STATIC_URL = "static/"
STATIC_ROOT = Path(env_str("DJANGO_STATIC_ROOT") or (VAR_DIR / "static"))
STATICFILES_DIRS = [BASE_DIR / "static"] if (BASE_DIR / "static").is_dir() else []
STORAGES = {
    "default": {"BACKEND": "django.core.files.storage.FileSystemStorage"},
    "staticfiles": {
        "BACKEND": "django.contrib.staticfiles.storage.StaticFilesStorage"
        if DEBUG
        else "whitenoise.storage.CompressedManifestStaticFilesStorage"
    },
}
MEDIA_URL = "media/"
MEDIA_ROOT = Path(env_str("MEDIA_ROOT") or (VAR_DIR / "media"))

# --- API --------------------------------------------------------------------------------------
# Requests per user (signed in) or per address (anonymous, token requests); read per request.
TAULINE_API_THROTTLE_RATES = {
    "anon": env_str("TAULINE_API_ANON_RATE", "120/hour"),
    "user": env_str("TAULINE_API_USER_RATE", "5000/hour"),
    "token": env_str("TAULINE_API_TOKEN_RATE", "10/minute"),
}
for _scope, _rate in TAULINE_API_THROTTLE_RATES.items():
    _count, _, _period = _rate.partition("/")
    if not (_count.isdigit() and _period in {"second", "minute", "hour", "day"}):
        raise ImproperlyConfigured(
            f"TAULINE_API_{_scope.upper()}_RATE={_rate!r} is not a rate like 100/hour "
            "(a number, then /second, /minute, /hour or /day)."
        )
REST_FRAMEWORK = {
    "DEFAULT_PERMISSION_CLASSES": ["rest_framework.permissions.IsAuthenticated"],
    # Token first, so an anonymous request is answered 401 with a WWW-Authenticate header.
    "DEFAULT_AUTHENTICATION_CLASSES": [
        "knox.auth.TokenAuthentication",
        "rest_framework.authentication.SessionAuthentication",
    ],
    "DEFAULT_PAGINATION_CLASS": "testing.api.pagination.CappedPagination",
    "PAGE_SIZE": 50,
    "DEFAULT_FILTER_BACKENDS": [
        "django_filters.rest_framework.DjangoFilterBackend",
        "rest_framework.filters.OrderingFilter",
    ],
    "DEFAULT_THROTTLE_CLASSES": [
        "testing.api.throttles.AnonThrottle",
        "testing.api.throttles.UserThrottle",
    ],
    "EXCEPTION_HANDLER": "testing.api.errors.api_exception_handler",
    "DEFAULT_SCHEMA_CLASS": "drf_spectacular.openapi.AutoSchema",
    "TEST_REQUEST_DEFAULT_FORMAT": "json",
    # JSON bodies only; an endpoint that takes a file upload names its own parsers.
    "DEFAULT_PARSER_CLASSES": ["rest_framework.parsers.JSONParser"],
}
REST_KNOX = {
    "AUTH_HEADER_PREFIX": "Token",
    "TOKEN_TTL": timedelta(hours=env_int("TAULINE_API_TOKEN_TTL_HOURS", 10, minimum=1)),
}
SPECTACULAR_SETTINGS = {
    "TITLE": "Tauline API",
    "DESCRIPTION": (
        "Lab records, direct shear results and throughput. Results apply only to the specimens "
        "tested; design parameters are for a qualified geotechnical engineer under local codes."
    ),
    "VERSION": "1",
    "SERVE_INCLUDE_SCHEMA": False,
    "SWAGGER_UI_DIST": "SIDECAR",
    "SWAGGER_UI_FAVICON_HREF": "SIDECAR",
    "REDOC_DIST": "SIDECAR",
    "COMPONENT_SPLIT_REQUEST": True,
    "SCHEMA_PATH_PREFIX": r"/api/v[0-9]+",
    "ENUM_NAME_OVERRIDES": {
        "SampleStatusEnum": "testing.models.samples.SampleStatus",
        "ShapeEnum": "testing.models.direct_shear.BoxShape",
        "RunKindEnum": "testing.models.results.RunKind",
        "ForceDeviceKindEnum": "testing.models.equipment.ForceDeviceKind",
        "GaugeKindEnum": "testing.models.equipment.GaugeKind",
        "RunStateEnum": "testing.models.results.RunState",
        "RevisionStateEnum": "reports.models.reports.RevisionState",
    },
}

# --- Security (tightened further when DEBUG is off) -------------------------------------------
SESSION_COOKIE_HTTPONLY = True
SESSION_COOKIE_SAMESITE = "Lax"
CSRF_COOKIE_SAMESITE = "Lax"
SECURE_CONTENT_TYPE_NOSNIFF = True
SECURE_REFERRER_POLICY = "same-origin"
X_FRAME_OPTIONS = "DENY"
# django-csp 4: scripts and styles only from this site or carrying the response's fresh nonce;
# no framing; no plugins. Plotly is served from the installed package, never from a CDN.
CONTENT_SECURITY_POLICY = {
    "DIRECTIVES": {
        "default-src": [SELF],
        "script-src": [SELF, NONCE],
        "style-src": [SELF, NONCE],
        "img-src": [SELF, "data:", "blob:"],
        "font-src": [SELF],
        "connect-src": [SELF],
        "object-src": [NONE],
        "base-uri": [SELF],
        "form-action": [SELF],
        "frame-ancestors": [NONE],
    }
}
if not DEBUG:
    SESSION_COOKIE_SECURE = env_bool("DJANGO_SECURE_COOKIES", True)
    CSRF_COOKIE_SECURE = SESSION_COOKIE_SECURE
    # HTTPS by default: plain HTTP is redirected and browsers are told (HSTS, one year) to use
    # HTTPS only. Behind a TLS proxy that sets X-Forwarded-Proto this needs nothing more; a
    # plain-HTTP install (a local try-out, tests on 127.0.0.1) sets DJANGO_SECURE_SSL_REDIRECT=0.
    SECURE_SSL_REDIRECT = env_bool("DJANGO_SECURE_SSL_REDIRECT", True)
    SECURE_HSTS_SECONDS = env_int("DJANGO_HSTS_SECONDS", 365 * 24 * 3600, minimum=0)
    SECURE_HSTS_INCLUDE_SUBDOMAINS = env_bool("DJANGO_HSTS_INCLUDE_SUBDOMAINS", True)
    SECURE_HSTS_PRELOAD = env_bool("DJANGO_HSTS_PRELOAD", False)
    if not SECURE_HSTS_PRELOAD:
        # Asking browsers to preload HSTS for the whole domain is the domain owner's decision,
        # not the app's; off unless DJANGO_HSTS_PRELOAD=1, so its deploy warning is silenced.
        SILENCED_SYSTEM_CHECKS = ["security.W021"]
    SECURE_PROXY_SSL_HEADER = ("HTTP_X_FORWARDED_PROTO", "https")

# --- Lab ---------------------------------------------------------------------------------------
TAULINE_LAB_NAME = env_str("TAULINE_LAB_NAME", "Tauline demonstration laboratory")
TAULINE_DEMO_PASSWORD = env_str("TAULINE_DEMO_PASSWORD", "tauline-demo")
# Reports: the lab's postal address on every report, the report number pattern ({year}, {seq},
# {project}), and the lab's signing key and certificate (PEM). Without the two files, a
# self-signed lab certificate is made on first use under MEDIA_ROOT/keys (development and demo).
TAULINE_LAB_ADDRESS = env_str("TAULINE_LAB_ADDRESS", "Unit 4, Example Business Park, Exampleton")
TAULINE_REPORT_NUMBER_PATTERN = env_str("TAULINE_REPORT_NUMBER_PATTERN", "TR-{year}-{seq:04d}")
TAULINE_SIGNING_KEY_FILE = env_str("TAULINE_SIGNING_KEY_FILE")
TAULINE_SIGNING_CERT_FILE = env_str("TAULINE_SIGNING_CERT_FILE")
TAULINE_DEFAULT_TURNAROUND_DAYS = env_int("TAULINE_DEFAULT_TURNAROUND_DAYS", 15, minimum=1)
# Largest logger or AGS4 upload accepted, checked before the file is parsed [bytes].
TAULINE_MAX_UPLOAD_BYTES = env_int("TAULINE_MAX_UPLOAD_BYTES", 100_000_000, minimum=1024)
# The cap holds while the body arrives: our handler counts the bytes first, then Django's own
# handlers keep small files in memory and spill large ones to a temporary file.
FILE_UPLOAD_HANDLERS = [
    "labsite.security.uploads.CappedUploadHandler",
    "django.core.files.uploadhandler.MemoryFileUploadHandler",
    "django.core.files.uploadhandler.TemporaryFileUploadHandler",
]

LOGGING = {
    "version": 1,
    "disable_existing_loggers": False,
    "handlers": {"console": {"class": "logging.StreamHandler"}},
    "root": {"handlers": ["console"], "level": env_str("TAULINE_LOG_LEVEL", "INFO")},
}
