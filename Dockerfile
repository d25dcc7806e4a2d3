# Tauline application image: the same image runs the web server (gunicorn), the Celery
# workers and the one-shot migrate step; docker-compose.yml picks the command.
FROM python:3.11-slim-bookworm

ENV PYTHONDONTWRITEBYTECODE=1 \
    PYTHONUNBUFFERED=1 \
    PIP_NO_CACHE_DIR=1 \
    PIP_DISABLE_PIP_VERSION_CHECK=1 \
    DJANGO_STATIC_ROOT=/app/static-collected \
    MEDIA_ROOT=/data/media

# WeasyPrint's system libraries and a font family for PDF reports.
RUN apt-get update \
    && apt-get install -y --no-install-recommends \
        libpango-1.0-0 libpangoft2-1.0-0 libharfbuzz-subset0 fonts-dejavu-core fontconfig \
    && rm -rf /var/lib/apt/lists/*

RUN groupadd --system tauline \
    && useradd --system --gid tauline --home-dir /app --no-create-home --shell /usr/sbin/nologin tauline

WORKDIR /app

# Dependencies first, in their own layer, so a code change does not reinstall them.
COPY pyproject.toml ./
RUN python -c "import tomllib; print('\n'.join(tomllib.load(open('pyproject.toml', 'rb'))['project']['dependencies']))" > /tmp/requirements.txt \
    && pip install -r /tmp/requirements.txt \
    && rm /tmp/requirements.txt

COPY . .
# Editable, so BASE_DIR stays /app and templates/ is found beside the code.
RUN pip install --no-deps -e . \
    && DJANGO_DEBUG=0 DJANGO_SECRET_KEY=collectstatic-at-build-only \
        python manage.py collectstatic --noinput \
    && mkdir -p /data/media /app/var \
    && chown -R tauline:tauline /data/media /app/var

USER tauline

EXPOSE 8000
CMD ["gunicorn", "labsite.wsgi:application", "--bind", "0.0.0.0:8000", "--workers", "3"]
