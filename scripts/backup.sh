#!/usr/bin/env bash
# Back up Tauline: the PostgreSQL database (pg_dump, custom format) and MEDIA_ROOT (tar), with a
# SHA256SUMS file, into a new timestamped folder under DEST (default var/backups).
#
#   DATABASE_URL=postgres://user@host:5432/tauline MEDIA_ROOT=/srv/tauline/media scripts/backup.sh /backups
#
# MEDIA_ROOT holds the issued PDFs, the original uploads and, unless TAULINE_SIGNING_KEY_FILE is set,
# the lab's signing key: keep backups as private as the server. Prints the backup folder last.
set -euo pipefail

cd "$(dirname "${BASH_SOURCE[0]}")/.."

dest_root=${1:-var/backups}
: "${DATABASE_URL:?DATABASE_URL must name the PostgreSQL database to back up}"
case "$DATABASE_URL" in
    postgres://* | postgresql://*) ;;
    *)
        echo "backup: DATABASE_URL is not PostgreSQL; this script backs up PostgreSQL only" >&2
        exit 2
        ;;
esac
media_root=${MEDIA_ROOT:-var/media}
for tool in pg_dump tar sha256sum; do
    command -v "$tool" >/dev/null 2>&1 || {
        echo "backup: '$tool' not found (apt-get install -y postgresql-client coreutils tar)" >&2
        exit 2
    }
done

stamp=$(date -u +%Y%m%dT%H%M%SZ)
folder="$dest_root/tauline-$stamp"
mkdir -p "$folder"
chmod 700 "$folder"

# One consistent snapshot of the database (pg_dump runs in a single transaction).
pg_dump --format=custom --no-owner --no-privileges --dbname="$DATABASE_URL" --file="$folder/db.dump"

# Media after the database: a PDF written in between is extra, never missing from a row.
if [ -d "$media_root" ]; then
    tar --create --gzip --file="$folder/media.tar.gz" --directory="$media_root" .
else
    echo "backup: MEDIA_ROOT $media_root does not exist; backing up an empty media folder" >&2
    tar --create --gzip --file="$folder/media.tar.gz" --files-from=/dev/null
fi

{
    echo "created_utc=$stamp"
    echo "tauline_commit=$(git rev-parse HEAD 2>/dev/null || echo unknown)"
    echo "pg_dump=$(pg_dump --version)"
} >"$folder/MANIFEST"
(cd "$folder" && sha256sum db.dump media.tar.gz MANIFEST >SHA256SUMS)
echo "backup: wrote $(du -sh "$folder" | cut -f1) to $folder"
echo "$folder"
