#!/usr/bin/env bash
# Check the system libraries and tools Tauline needs outside Python, and install
# what is missing when that is safe to do (root on Debian or Ubuntu).
#
#   scripts/system-deps.sh        WeasyPrint's Pango/HarfBuzz, fontconfig with a font, poppler-utils
#   scripts/system-deps.sh --ci   ... plus docker-compose (compose file validation) and chromium
#                                 (browser tests)
#
# Quiet and exit 0 when everything is present. Otherwise, as root on Debian/Ubuntu, it runs
# `apt-get update` once and installs the packages; anywhere else it prints the one command
# to run and exits 1.
set -uo pipefail

ci=0
for arg in "$@"; do
    case "$arg" in
        --ci) ci=1 ;;
        -h | --help)
            sed -n '2,12p' "$0" | sed 's/^# \{0,1\}//'
            exit 0
            ;;
        *)
            echo "system-deps.sh: unknown option '$arg' (use --ci or --help)" >&2
            exit 2
            ;;
    esac
done

base_pkgs=(libpango-1.0-0 libpangoft2-1.0-0 libharfbuzz-subset0 fonts-dejavu-core fontconfig poppler-utils)
ci_pkgs=(docker-compose chromium)

ldconfig_bin=""
for candidate in ldconfig /sbin/ldconfig /usr/sbin/ldconfig; do
    if command -v "$candidate" >/dev/null 2>&1; then
        ldconfig_bin=$candidate
        break
    fi
done
ld_cache=""
if [ -n "$ldconfig_bin" ]; then
    ld_cache=$("$ldconfig_bin" -p 2>/dev/null || true)
fi

# have_lib SONAME SHORTNAME: the shared library is known to the dynamic loader.
have_lib() {
    if [ -n "$ld_cache" ]; then
        grep -qF -- "$1 " <<<"$ld_cache"
        return
    fi
    # No ldconfig (not glibc Linux): ask the platform's own library search.
    command -v python3 >/dev/null 2>&1 &&
        python3 -c "import ctypes.util, sys; sys.exit(0 if ctypes.util.find_library('$2') else 1)" 2>/dev/null
}

have_cmd() { command -v "$1" >/dev/null 2>&1; }

have_font() { have_cmd fc-list && [ -n "$(fc-list 2>/dev/null | head -n 1)" ]; }

missing=()
check() {
    # check DESCRIPTION TEST...: record DESCRIPTION when TEST fails.
    local what=$1
    shift
    "$@" || missing+=("$what")
}

run_checks() {
    missing=()
    check "libpango-1.0.so.0" have_lib libpango-1.0.so.0 pango-1.0
    check "libpangoft2-1.0.so.0" have_lib libpangoft2-1.0.so.0 pangoft2-1.0
    check "libharfbuzz-subset.so.0" have_lib libharfbuzz-subset.so.0 harfbuzz-subset
    check "a font (fc-list)" have_font
    check "pdftotext/pdftoppm (poppler-utils)" have_cmd pdftotext
    check "pdftotext/pdftoppm (poppler-utils)" have_cmd pdftoppm
    if [ "$ci" = 1 ]; then
        check "docker-compose" have_cmd docker-compose
        check "chromium" have_cmd chromium
    fi
}

run_checks
if [ "${#missing[@]}" -eq 0 ]; then
    exit 0
fi

pkgs=("${base_pkgs[@]}")
if [ "$ci" = 1 ]; then
    pkgs+=("${ci_pkgs[@]}")
fi

os_id=""
os_like=""
if [ -r /etc/os-release ]; then
    os_id=$(. /etc/os-release && echo "${ID:-}")
    os_like=$(. /etc/os-release && echo "${ID_LIKE:-}")
fi
debian_like=0
case " $os_id $os_like " in
    *" debian "* | *" ubuntu "*) debian_like=1 ;;
esac

# Deduplicate for the message (two poppler checks share one package).
missing_list=$(printf '%s\n' "${missing[@]}" | awk '!seen[$0]++' | paste -sd ',' - | sed 's/,/, /g')
echo "system-deps: missing: $missing_list" >&2

if [ "$debian_like" = 1 ] && [ "$(id -u)" = 0 ] && have_cmd apt-get; then
    echo "system-deps: installing with apt-get: ${pkgs[*]}" >&2
    export DEBIAN_FRONTEND=noninteractive
    log=$(mktemp "${TMPDIR:-/tmp}/tauline-apt.XXXXXX")
    if ! apt-get update -qq >"$log" 2>&1; then
        tail -n 20 "$log" >&2
        echo "system-deps: 'apt-get update' failed (network or sources?). Fix it, then run:" >&2
        echo "  apt-get update && apt-get install -y --no-install-recommends ${pkgs[*]}" >&2
        rm -f "$log"
        exit 1
    fi
    if ! apt-get install -y -qq --no-install-recommends "${pkgs[@]}" >"$log" 2>&1; then
        tail -n 20 "$log" >&2
        echo "system-deps: 'apt-get install' failed. Fix the error above, then run:" >&2
        echo "  apt-get install -y --no-install-recommends ${pkgs[*]}" >&2
        rm -f "$log"
        exit 1
    fi
    rm -f "$log"
    # Re-read the loader cache: the packages just installed are not in the copy taken above.
    if [ -n "$ldconfig_bin" ]; then
        "$ldconfig_bin" >/dev/null 2>&1 || true
        ld_cache=$("$ldconfig_bin" -p 2>/dev/null || true)
    fi
    run_checks
    if [ "${#missing[@]}" -eq 0 ]; then
        echo "system-deps: installed." >&2
        exit 0
    fi
    missing_list=$(printf '%s\n' "${missing[@]}" | awk '!seen[$0]++' | paste -sd ',' - | sed 's/,/, /g')
    echo "system-deps: still missing after apt-get install: $missing_list" >&2
    exit 1
fi

echo "system-deps: install the missing system packages with this command, then run make again:" >&2
if [ "$debian_like" = 1 ]; then
    echo "  sudo apt-get install -y --no-install-recommends ${pkgs[*]}" >&2
elif [ "$(uname -s)" = Darwin ]; then
    echo "  brew install pango harfbuzz fontconfig poppler" >&2
else
    case " $os_id $os_like " in
        *" fedora "* | *" rhel "* | *" centos "*)
            echo "  sudo dnf install -y pango harfbuzz fontconfig dejavu-sans-fonts poppler-utils" >&2 ;;
        *" arch "*)
            echo "  sudo pacman -S --needed pango harfbuzz fontconfig ttf-dejavu poppler" >&2 ;;
        *" alpine "*)
            echo "  sudo apk add pango harfbuzz-subset fontconfig font-dejavu poppler-utils" >&2 ;;
        *)
            echo "  (your package manager) install: Pango >= 1.44 with pangoft2, HarfBuzz with hb-subset, fontconfig and a TrueType font, poppler-utils" >&2 ;;
    esac
fi
exit 1
