#!/usr/bin/env bash
# Restore drill: restore a backup made by scripts/backup.sh into a scratch database and a scratch
# media folder, then run `manage.py verify_integrity` against them. Nothing live is touched; the
# scratch copies are removed afterwards (KEEP_SCRATCH=1 keeps them for a look).
#
#   scripts/restore-drill.sh var/backups/tauline-20261102T030000Z
#
# DRILL_PG_URL: the PostgreSQL server for the scratch database (default postgres://postgres@127.0.0.1:5432).
# Exit status: 0 only if the checksums, the restore and every integrity check pass.
set -euo pipefail

cd "$(dirname "${BASH_SOURCE[0]}")/.."

backup=${1:?usage: scripts/restore-drill.sh BACKUP_FOLDER}
server=${DRILL_PG_URL:-postgres://postgres@127.0.0.1:5432}
server=${server%/}
python=${PYTHON:-.venv/bin/python}
[ -x "$python" ] || python=python3
for tool in pg_restore createdb dropdb sha256sum tar; do
    command -v "$tool" >/dev/null 2>&1 || {
        echo "drill: '$tool' not found (apt-get install -y postgresql-client)" >&2
        exit 2
    }
done

echo "drill: checking $backup/SHA256SUMS"
(cd "$backup" && sha256sum --check --strict --quiet SHA256SUMS)

scratch_db="tauline_drill_$(date -u +%Y%m%d%H%M%S)_$$"
scratch_media=$(mktemp -d "${TMPDIR:-/tmp}/tauline-drill-media.XXXXXX")
cleanup() {
    if [ "${KEEP_SCRATCH:-0}" = 1 ]; then
        echo "drill: kept database $scratch_db and media $scratch_media"
        return
    fi
    dropdb --if-exists --maintenance-db="$server/postgres" "$scratch_db" || true
    rm -rf "$scratch_media"
}
trap cleanup EXIT

echo "drill: restoring into scratch database $scratch_db"
createdb --maintenance-db="$server/postgres" "$scratch_db"
pg_restore --no-owner --no-privileges --exit-on-error --dbname="$server/$scratch_db" "$backup/db.dump"
tar --extract --gzip --file="$backup/media.tar.gz" --directory="$scratch_media"

echo "drill: verifying the restored copy"
env -u REDIS_URL DATABASE_URL="$server/$scratch_db" MEDIA_ROOT="$scratch_media" \
    "$python" manage.py verify_integrity
echo "drill: passed"
