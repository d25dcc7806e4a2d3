"""The API permission matrix: every resolved ``/api/`` route × method → the status each persona gets.

Personas, in column order: anonymous, client_a, client_b, technician, checker, approver, manager,
deactivated (a former technician whose account is switched off but still holds a token).

An entry is a status for every target, or a pair ``(status on client A's record, status on client
B's record)``. On a detail route the targets are A's and B's object of that type; on a create
route they are a payload whose parent belongs to A and one whose parent belongs to B.
``test_matrix.py`` fails if a route or method is missing here, and checks every cell.
"""

from __future__ import annotations

Expected = int | tuple[int, int]
Row = dict[str, Expected]

PERSONAS = (
    "anonymous",
    "client_a",
    "client_b",
    "technician",
    "checker",
    "approver",
    "manager",
    "deactivated",
)
METHODS = ("GET", "POST", "PUT", "PATCH", "DELETE")


def row(
    anonymous: Expected,
    client_a: Expected,
    client_b: Expected,
    technician: Expected,
    checker: Expected,
    approver: Expected,
    manager: Expected,
    deactivated: Expected,
) -> Row:
    return dict(
        zip(
            PERSONAS,
            (anonymous, client_a, client_b, technician, checker, approver, manager, deactivated),
            strict=True,
        )
    )


BOTH_200 = (200, 200)
# Read one record: a client sees only their own organisation's; another's is 404, as if missing.
DETAIL = row(401, (200, 404), (404, 200), BOTH_200, BOTH_200, BOTH_200, BOTH_200, 401)
# A list: every persona that may read gets 200 (the rows are scoped; test_sweep checks them).
LIST = row(401, 200, 200, 200, 200, 200, 200, 401)
# Staff-only resources: clients are refused before any record is looked up.
STAFF_DETAIL = row(401, 403, 403, BOTH_200, BOTH_200, BOTH_200, BOTH_200, 401)
STAFF_LIST = row(401, 403, 403, 200, 200, 200, 200, 401)
# A method the route does not offer: clients are refused as read-only first (403, the same for
# every record, so nothing leaks); staff are told the method is not allowed.
NO_WRITE = row(401, 403, 403, 405, 405, 405, 405, 401)
# GET on a POST-only action: a safe method passes the client check, then is not allowed.
NO_GET = row(401, 405, 405, 405, 405, 405, 405, 401)
# Create by technicians and the lab manager (records, test sets, stages).
CREATE_BY_TECHNICIAN = row(401, 403, 403, (201, 201), 403, 403, (201, 201), 401)
# Create by the lab manager only (projects, organisations).
CREATE_BY_MANAGER = row(401, 403, 403, 403, 403, 403, (201, 201), 401)


def record(list_post: Row | None = None) -> dict[str, dict[str, Row]]:
    """A record resource: list and detail GET; create when offered; nothing else."""
    return {
        "list": {
            "GET": LIST,
            "POST": list_post or NO_WRITE,
            "PUT": NO_WRITE,
            "PATCH": NO_WRITE,
            "DELETE": NO_WRITE,
        },
        "detail": {
            "GET": DETAIL,
            "POST": NO_WRITE,
            "PUT": NO_WRITE,
            "PATCH": NO_WRITE,
            "DELETE": NO_WRITE,
        },
    }


def read_action() -> dict[str, Row]:
    """A GET-only view of one record (readings, events, a revision's PDF)."""
    return {"GET": DETAIL, "POST": NO_WRITE, "PUT": NO_WRITE, "PATCH": NO_WRITE, "DELETE": NO_WRITE}


def staff_read_action() -> dict[str, Row]:
    """A GET-only download for lab staff (AGS4 file, results tables): clients are refused (403)
    before any record is looked up."""
    return {
        "GET": STAFF_DETAIL,
        "POST": NO_WRITE,
        "PUT": NO_WRITE,
        "PATCH": NO_WRITE,
        "DELETE": NO_WRITE,
    }


def post_action(post: Row, get: Row = NO_GET, other: Row = NO_WRITE) -> dict[str, Row]:
    return {"GET": get, "POST": post, "PUT": other, "PATCH": other, "DELETE": other}


_projects = record(CREATE_BY_MANAGER)
_boreholes = record(CREATE_BY_TECHNICIAN)
_samples = record(CREATE_BY_TECHNICIAN)
_specimens = record(CREATE_BY_TECHNICIAN)
_test_sets = record(CREATE_BY_TECHNICIAN)
_stages = record(CREATE_BY_TECHNICIAN)
_results = record()
_envelopes = record()

_STAFF_ONLY_OTHER = row(401, 403, 403, 405, 405, 405, 405, 401)


def staff_record(list_post: Row) -> dict[str, dict[str, Row]]:
    """A lab-staff-only resource (the equipment register, reports): clients are refused before
    any record is looked up; created through a service; never updated or deleted here."""
    return {
        "list": {
            "GET": STAFF_LIST,
            "POST": list_post,
            "PUT": _STAFF_ONLY_OTHER,
            "PATCH": _STAFF_ONLY_OTHER,
            "DELETE": _STAFF_ONLY_OTHER,
        },
        "detail": {m: (STAFF_DETAIL if m == "GET" else _STAFF_ONLY_OTHER) for m in METHODS},
    }


# The equipment register: read by lab staff, added to by the lab manager only.
_apparatus = staff_record(CREATE_BY_MANAGER)
_force_devices = staff_record(CREATE_BY_MANAGER)
_calibrations = staff_record(CREATE_BY_MANAGER)
_gauges = staff_record(CREATE_BY_MANAGER)
# Reports: read by lab staff; created (with a draft first revision) by those who prepare them.
_reports = staff_record(CREATE_BY_TECHNICIAN)
# Readings upload to an unreported stage: technicians and the lab manager (201); checkers and
# approvers do not enter readings (the service's 403).
_READINGS_UPLOAD = row(401, 403, 403, (201, 201), 403, 403, (201, 201), 401)
# Linking a stage to the force device its readings were taken with: who sets up stages.
_LINK_CALIBRATION = row(401, 403, 403, (200, 200), 403, 403, (200, 200), 401)
# Recompute requests: any lab staff (202 Accepted); clients refused.
_RECOMPUTE = row(401, 403, 403, (202, 202), (202, 202), (202, 202), (202, 202), 401)
# Stage exclusion on a reported set: the role check first (approvers may not), then the rule that a
# reported set's selection cannot change (400).
_EXCLUDE_ON_REPORTED = row(401, 403, 403, (400, 400), (400, 400), 403, (400, 400), 401)
# Any lab staff may move a sample's state (received → scheduled here).
_TRANSITION = row(401, 403, 403, BOTH_200, BOTH_200, BOTH_200, BOTH_200, 401)

# Anyone may ask for a token; a wrong password (anonymous here) or a switched-off account is 400.
_TOKEN_POST = row(400, 200, 200, 200, 200, 200, 200, 400)
_NOT_ALLOWED_FOR_ANYONE = row(405, 405, 405, 405, 405, 405, 405, 405)
# Revoking needs a valid token.
_LOGOUT_POST = row(401, 204, 204, 204, 204, 204, 204, 401)
_LOGOUT_OTHER = row(401, 405, 405, 405, 405, 405, 405, 401)
# The schema and its docs page are public; a switched-off account's token is still refused.
_PUBLIC_GET = row(200, 200, 200, 200, 200, 200, 200, 401)
_PUBLIC_OTHER = row(405, 405, 405, 405, 405, 405, 405, 401)
_ROOT_OTHER = row(401, 405, 405, 405, 405, 405, 405, 401)

# Report revisions. Reads: a client sees only their organisation's issued revisions (and their
# PDFs); lab staff see every revision. Sign-off actions, each on a revision waiting for that step
# and with the caller's password: clients are refused as read-only (403) before any record is
# looked up; staff without the role get the service's refusal (403). Check: a checker who did not
# prepare the data. Approve and issue: an approving engineer who neither prepared nor checked it
# (the lab manager holds neither role). Supersede (start an amendment of the issued revision):
# technicians and the lab manager, who prepare reports.
_revisions = record()
_CHECK = row(401, 403, 403, 403, 200, 403, 403, 401)
_APPROVE = row(401, 403, 403, 403, 403, 200, 403, 401)
_ISSUE = row(401, 403, 403, 403, 403, 200, 403, 401)
_SUPERSEDE = row(401, 403, 403, 201, 403, 403, 201, 401)

MATRIX: dict[str, dict[str, Row]] = {
    "api:token": {
        "GET": _NOT_ALLOWED_FOR_ANYONE,
        "POST": _TOKEN_POST,
        "PUT": _NOT_ALLOWED_FOR_ANYONE,
        "PATCH": _NOT_ALLOWED_FOR_ANYONE,
        "DELETE": _NOT_ALLOWED_FOR_ANYONE,
    },
    "api:logout": {
        "GET": _LOGOUT_OTHER,
        "POST": _LOGOUT_POST,
        "PUT": _LOGOUT_OTHER,
        "PATCH": _LOGOUT_OTHER,
        "DELETE": _LOGOUT_OTHER,
    },
    "api:schema": {m: (_PUBLIC_GET if m == "GET" else _PUBLIC_OTHER) for m in METHODS},
    "api:docs": {m: (_PUBLIC_GET if m == "GET" else _PUBLIC_OTHER) for m in METHODS},
    "api:api-root": {m: (LIST if m == "GET" else _ROOT_OTHER) for m in METHODS},
    "api:organisation-list": {
        "GET": STAFF_LIST,
        "POST": CREATE_BY_MANAGER,
        "PUT": _STAFF_ONLY_OTHER,
        "PATCH": _STAFF_ONLY_OTHER,
        "DELETE": _STAFF_ONLY_OTHER,
    },
    "api:organisation-detail": {
        "GET": STAFF_DETAIL,
        "POST": _STAFF_ONLY_OTHER,
        "PUT": _STAFF_ONLY_OTHER,
        "PATCH": _STAFF_ONLY_OTHER,
        "DELETE": _STAFF_ONLY_OTHER,
    },
    "api:project-list": _projects["list"],
    "api:project-detail": _projects["detail"],
    "api:project-ags": staff_read_action(),
    "api:project-results": staff_read_action(),
    "api:borehole-list": _boreholes["list"],
    "api:borehole-detail": _boreholes["detail"],
    "api:sample-list": _samples["list"],
    "api:sample-detail": _samples["detail"],
    "api:sample-events": read_action(),
    "api:sample-transition": post_action(_TRANSITION),
    "api:specimen-list": _specimens["list"],
    "api:specimen-detail": _specimens["detail"],
    "api:test-set-list": _test_sets["list"],
    "api:test-set-detail": _test_sets["detail"],
    "api:test-set-recompute": post_action(_RECOMPUTE),
    "api:test-set-results": staff_read_action(),
    "api:stage-list": _stages["list"],
    "api:stage-detail": _stages["detail"],
    "api:stage-readings": read_action(),
    "api:stage-consolidation-readings": read_action(),
    "api:stage-exclude": post_action(_EXCLUDE_ON_REPORTED),
    "api:stage-include": post_action(_EXCLUDE_ON_REPORTED),
    "api:stage-readings-upload": post_action(_READINGS_UPLOAD),
    "api:stage-force-calibration": post_action(_LINK_CALIBRATION),
    "api:computation-run-list": {
        "GET": STAFF_LIST,
        "POST": _STAFF_ONLY_OTHER,
        "PUT": _STAFF_ONLY_OTHER,
        "PATCH": _STAFF_ONLY_OTHER,
        "DELETE": _STAFF_ONLY_OTHER,
    },
    "api:computation-run-detail": {
        "GET": STAFF_DETAIL,
        "POST": _STAFF_ONLY_OTHER,
        "PUT": _STAFF_ONLY_OTHER,
        "PATCH": _STAFF_ONLY_OTHER,
        "DELETE": _STAFF_ONLY_OTHER,
    },
    "api:stage-result-list": _results["list"],
    "api:stage-result-detail": _results["detail"],
    "api:envelope-list": _envelopes["list"],
    "api:envelope-detail": _envelopes["detail"],
    # Recompute is a staff-only action: clients are refused whatever the method.
    "api:envelope-recompute": post_action(
        _RECOMPUTE, get=_STAFF_ONLY_OTHER, other=_STAFF_ONLY_OTHER
    ),
    "api:apparatus-list": _apparatus["list"],
    "api:apparatus-detail": _apparatus["detail"],
    "api:force-device-list": _force_devices["list"],
    "api:force-device-detail": _force_devices["detail"],
    "api:calibration-list": _calibrations["list"],
    "api:calibration-detail": _calibrations["detail"],
    "api:gauge-list": _gauges["list"],
    "api:gauge-detail": _gauges["detail"],
    "api:report-list": _reports["list"],
    "api:report-detail": _reports["detail"],
    "api:report-revision-list": _revisions["list"],
    "api:report-revision-detail": _revisions["detail"],
    "api:report-revision-pdf": read_action(),
    "api:report-revision-check": post_action(_CHECK),
    "api:report-revision-approve": post_action(_APPROVE),
    "api:report-revision-issue": post_action(_ISSUE),
    "api:report-revision-supersede": post_action(_SUPERSEDE),
    "api:throughput-list": {
        "GET": LIST,
        "POST": NO_WRITE,
        "PUT": NO_WRITE,
        "PATCH": NO_WRITE,
        "DELETE": NO_WRITE,
    },
}
