#!/usr/bin/env bash
# Code and dependency scanning, as CI runs it (.ci/run):
#   bandit    over labsite, testing and reports; skips and their reasons are in pyproject.toml
#             ([tool.bandit]). Any finding fails.
#   pip-audit over the installed environment against PyPI's vulnerability data. A known
#             vulnerability fails (raise that dependency's lower bound in pyproject.toml). When the
#             vulnerability data cannot be reached (no network, or a registry mirror without it), the
#             step prints a warning saying nothing was audited and carries on: only that case.
set -euo pipefail

cd "$(dirname "${BASH_SOURCE[0]}")/.."
bin=${VENV:-.venv}/bin

echo "scan: bandit"
"$bin/bandit" -q -c pyproject.toml -r labsite testing reports
echo "scan: bandit found nothing (skips justified in pyproject.toml [tool.bandit])"

echo "scan: pip-audit"
report=$(mktemp)
errors=$(mktemp)
trap 'rm -f "$report" "$errors"' EXIT
set +e
"$bin/pip-audit" --progress-spinner off --skip-editable --format json --output "$report" 2>"$errors"
status=$?
set -e
"$bin/python" - "$report" "$errors" "$status" <<'PY'
import json
import re
import sys

report_path, errors_path, status = sys.argv[1], sys.argv[2], int(sys.argv[3])
errors = open(errors_path, encoding="utf-8", errors="replace").read()
network = re.compile(
    r"ConnectionError|NameResolutionError|Max retries exceeded|Temporary failure in name resolution|"
    r"timed out|Network is unreachable|ProxyError|SSLError"
)
try:
    data = json.load(open(report_path, encoding="utf-8"))
except (OSError, ValueError):
    data = None
if data is None:
    if network.search(errors):
        print("scan: WARNING: pip-audit could not reach the vulnerability data (network); "
              "dependencies were NOT audited. Run scripts/security-scan.sh where PyPI is reachable.")
        sys.exit(0)
    sys.stderr.write(errors)
    print(f"scan: pip-audit failed (exit {status}) for a reason other than the network", file=sys.stderr)
    sys.exit(1)
deps = data.get("dependencies", [])
audited = [d for d in deps if "skip_reason" not in d]
vulnerable = [d for d in audited if d.get("vulns")]
for dep in vulnerable:
    for vuln in dep["vulns"]:
        fixes = ", ".join(vuln.get("fix_versions") or []) or "no fixed version yet"
        print(f"scan: VULNERABLE {dep['name']} {dep['version']}: {vuln['id']} (fixed in {fixes})")
if vulnerable:
    print(f"scan: pip-audit found {len(vulnerable)} vulnerable package(s): raise their lower bounds "
          "in pyproject.toml", file=sys.stderr)
    sys.exit(1)
if not audited:
    print(f"scan: WARNING: the registry answered for none of the {len(deps)} packages (a mirror "
          "without PyPI's vulnerability data?); dependencies were NOT audited.")
    sys.exit(0)
skipped = len(deps) - len(audited)
print(f"scan: pip-audit: {len(audited)} packages audited, 0 known vulnerabilities"
      + (f" ({skipped} not found on the registry, not audited)" if skipped else ""))
PY
