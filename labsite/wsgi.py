"""WSGI entry point (gunicorn labsite.wsgi:application).

The URLconf, and with it every view module, is loaded here, while the worker boots, rather than
inside the first request it serves: a freshly started gunicorn worker answers its first request
as fast as its hundredth (a health probe must not wait for imports).
"""

import os

from django.core.wsgi import get_wsgi_application
from django.urls import get_resolver

os.environ.setdefault("DJANGO_SETTINGS_MODULE", "labsite.settings")
application = get_wsgi_application()
get_resolver().url_patterns  # noqa: B018 - imports the URLconf and the views it names
