"""Who may use each route of the app: one rule per (method, path template), declared by hand.

The table is a declaration, not a reading of the code: ``tests/web/test_route_matrix.py`` walks
``create_app()``'s route table and fails for a route without a rule (and for a rule without a
route), then sends every route a request from every kind of caller and checks the app keeps the
rule. A new route therefore gets a rule here, written by whoever adds it, before the suite passes.

Where the rules come from: the pages' dependencies (``require_user``, ``require_roles(...)`` in
server/web/*.py, server/auth/sessions.py), the API's (``Reader``, ``Writer``, ``Registrar``,
``Importer``, ``ClientReader``, ``Reviewer`` in server/api/v1/auth.py), the share-link pages
(server/web/client.py, a valid token in the path) and the public pages (sign-in, /verify, the
calculation API, health and the API documents). A HEAD route that comes with a GET one is the
GET's (Starlette adds it); the /static mount is files, not a route, and is left out by name.
"""

from __future__ import annotations

from dataclasses import dataclass
from enum import StrEnum


class Door(StrEnum):
    """How a caller proves who they are on a route."""

    public = "public"  # nothing: anyone
    link = "link"  # a valid client share-link token in the path (server/services/links.py)
    session = "session"  # a signed-in browser: the session cookie (server/auth/sessions.py)
    token = "token"  # a personal API token: Authorization: Bearer (server/api/v1/auth.py)


STAFF_ROLES = frozenset({"technician", "reviewer", "admin"})
CHECKER_ROLES = frozenset({"reviewer", "admin"})  # server/workflow/states.py CHECKERS
ADMIN_ROLES = frozenset({"admin"})


@dataclass(frozen=True)
class Rule:
    """A door, and behind a session or token door the roles let through; a token door also names
    the least scope (a write token may read, a read token may not write)."""

    door: Door
    roles: frozenset[str] = frozenset()
    scope: str = ""

    def __str__(self) -> str:
        if self.door in (Door.public, Door.link):
            return self.door.value
        who = "/".join(sorted(self.roles))
        return f"{self.door.value}: {who}" + (f", {self.scope} scope" if self.scope else "")


PUBLIC = Rule(Door.public)
CLIENT_LINK = Rule(Door.link)
STAFF = Rule(Door.session, STAFF_ROLES)  # require_user
CHECKER = Rule(Door.session, CHECKER_ROLES)  # require_roles("reviewer", "admin")
ADMIN = Rule(Door.session, ADMIN_ROLES)  # require_roles("admin")
API_READ = Rule(Door.token, STAFF_ROLES, "read")  # Reader: any valid token
API_WRITE = Rule(Door.token, STAFF_ROLES, "write")  # Writer: a write-scope token
API_CHECKER_READ = Rule(Door.token, CHECKER_ROLES, "read")  # ClientReader
API_CHECKER_WRITE = Rule(Door.token, CHECKER_ROLES, "write")  # Registrar, Importer, Reviewer

# Paths of the route table that are not routes a rule can speak for.
EXCLUDED = frozenset({"/static"})  # StaticFiles mount: the app's own CSS, JS and htmx

# Written as pairs, not a dict literal, so that a route declared twice is seen (a dict keeps the last).
DECLARED: tuple[tuple[tuple[str, str], Rule], ...] = (
    # FastAPI's own documents (create_app keeps the defaults): the API describes itself to anyone.
    (("GET", "/openapi.json"), PUBLIC),
    (("GET", "/docs"), PUBLIC),
    (("GET", "/docs/oauth2-redirect"), PUBLIC),
    (("GET", "/redoc"), PUBLIC),
    (("GET", "/healthz"), PUBLIC),  # server/web/health.py: the process lives
    (("GET", "/readyz"), PUBLIC),  # server/web/health.py: database, schema, worker
    # server/api/calculations.py: stateless and public (DESIGN.md section 3)
    (("POST", "/api/v1/calculations"), PUBLIC),
    (("GET", "/api/v1/methods"), PUBLIC),
    # server/api/v1/__init__.py
    (("GET", "/api/v1/me"), API_READ),
    # server/api/v1/jobs.py
    (("GET", "/api/v1/clients"), API_CHECKER_READ),
    (("POST", "/api/v1/clients"), API_CHECKER_WRITE),
    (("GET", "/api/v1/jobs"), API_READ),
    (("POST", "/api/v1/jobs"), API_CHECKER_WRITE),
    (("GET", "/api/v1/jobs/{job_id}"), API_READ),
    (("GET", "/api/v1/jobs/{job_id}/locations"), API_READ),
    (("POST", "/api/v1/jobs/{job_id}/locations"), API_CHECKER_WRITE),
    (("GET", "/api/v1/jobs/{job_id}/samples"), API_READ),
    (("POST", "/api/v1/jobs/{job_id}/samples"), API_CHECKER_WRITE),
    (("POST", "/api/v1/jobs/{job_id}/imports"), API_CHECKER_WRITE),
    # server/api/v1/lab_tests.py: a technician enters readings and hands in; checkers sign
    (("GET", "/api/v1/tests"), API_READ),
    (("GET", "/api/v1/jobs/{job_id}/tests"), API_READ),
    (("GET", "/api/v1/tests/{test_id}"), API_READ),
    (("PUT", "/api/v1/tests/{test_id}/readings"), API_WRITE),
    (("POST", "/api/v1/tests/{test_id}/submit"), API_WRITE),
    (("POST", "/api/v1/tests/{test_id}/approve"), API_CHECKER_WRITE),
    (("POST", "/api/v1/tests/{test_id}/return"), API_CHECKER_WRITE),
    # server/api/v1/reports.py
    (("GET", "/api/v1/jobs/{job_id}/reports"), API_READ),
    (("GET", "/api/v1/reports/{report_id}.pdf"), API_READ),
    (("GET", "/api/v1/reports/{report_id}.ags"), API_READ),
    (("GET", "/api/v1/jobs/{job_id}/export"), API_READ),
    # server/web/signin.py: the way in (and out) is open to all; CSRF still applies
    (("GET", "/signin"), PUBLIC),
    (("POST", "/signin"), PUBLIC),
    (("POST", "/signout"), PUBLIC),
    # server/web/intake.py: registration is for reviewers and admins
    (("GET", "/clients"), CHECKER),
    (("POST", "/clients"), CHECKER),
    (("GET", "/clients/{client_id}"), CHECKER),
    (("POST", "/clients/{client_id}"), CHECKER),
    (("GET", "/jobs/new"), CHECKER),
    (("POST", "/jobs/new"), CHECKER),
    (("GET", "/jobs/{job_id}/edit"), CHECKER),
    (("POST", "/jobs/{job_id}/edit"), CHECKER),
    (("POST", "/jobs/{job_id}/locations"), CHECKER),
    (("GET", "/locations/{location_id}/edit"), CHECKER),
    (("POST", "/locations/{location_id}/edit"), CHECKER),
    (("POST", "/jobs/{job_id}/samples"), CHECKER),
    (("GET", "/samples/{sample_id}/edit"), CHECKER),
    (("POST", "/samples/{sample_id}/edit"), CHECKER),
    (("POST", "/samples/{sample_id}/withdraw"), CHECKER),
    # server/web/job_page.py
    (("GET", "/jobs/{job_id}"), STAFF),
    (("GET", "/samples/{sample_id}"), STAFF),
    # server/web/exports.py
    (("GET", "/jobs/{job_id}/export.csv"), STAFF),
    (("GET", "/jobs/{job_id}/export.xlsx"), STAFF),
    (("GET", "/jobs/{job_id}/export.ags"), STAFF),
    # server/web/receipt.py: samples are received and labelled at the bench
    (("GET", "/jobs/{job_id}/receive"), STAFF),
    (("POST", "/jobs/{job_id}/receive"), STAFF),
    (("GET", "/jobs/{job_id}/labels.pdf"), STAFF),
    (("GET", "/samples/{sample_id}/label.pdf"), STAFF),
    # server/web/imports.py: importing is registration; the blank templates are for anyone signed in
    (("GET", "/import"), CHECKER),
    (("GET", "/jobs/{job_id}/import"), CHECKER),
    (("POST", "/import/preview"), CHECKER),
    (("POST", "/import/confirm"), CHECKER),
    (("GET", "/imports/template.csv"), STAFF),
    (("GET", "/imports/template.xlsx"), STAFF),
    # server/web/jobs.py
    (("GET", "/"), STAFF),
    (("GET", "/jobs"), STAFF),
    # server/web/bench.py: every role may enter readings (workflow TRANSITIONS, enter: EVERYONE)
    (("GET", "/tests/{test_id}"), STAFF),
    (("POST", "/tests/{test_id}/preview"), STAFF),
    (("POST", "/tests/{test_id}/fields"), STAFF),
    (("POST", "/tests/{test_id}/offline-discard"), STAFF),
    (("POST", "/tests/{test_id}/readings"), STAFF),
    # server/web/review.py: the review desk; the reissue overview is shown to anyone signed in
    (("GET", "/review"), CHECKER),
    (("POST", "/review/batch"), CHECKER),
    (("GET", "/review/{test_id}"), CHECKER),
    (("POST", "/review/{test_id}/approve"), CHECKER),
    (("POST", "/review/{test_id}/return"), CHECKER),
    (("POST", "/review/{test_id}/amend"), CHECKER),
    (("GET", "/jobs/{job_id}/reissue"), STAFF),
    # server/web/reports.py: issuing reports and managing client links
    (("POST", "/jobs/{job_id}/reports"), CHECKER),
    (("POST", "/reports/{report_id}/reissue"), CHECKER),
    (("GET", "/jobs/{job_id}/reports/preview"), CHECKER),
    (("POST", "/jobs/{job_id}/reports/preview"), CHECKER),
    (("GET", "/jobs/{job_id}/renders"), STAFF),
    (("POST", "/renders/{render_id}/retry"), CHECKER),
    (("POST", "/jobs/{job_id}/links"), CHECKER),
    (("GET", "/jobs/{job_id}/links"), CHECKER),
    (("POST", "/links/{link_id}/revoke"), CHECKER),
    # server/web/client.py: the client's link, the staff's downloads, verification for anyone
    (("GET", "/share/{token}"), CLIENT_LINK),
    (("GET", "/share/{token}/reports/{report_id}.pdf"), CLIENT_LINK),
    (("GET", "/share/{token}/reports/{report_id}.ags"), CLIENT_LINK),
    (("GET", "/reports/{report_id}.ags"), STAFF),
    (("GET", "/reports/{report_id}.pdf"), STAFF),
    (("GET", "/verify"), PUBLIC),
    (("POST", "/verify"), PUBLIC),
    (("GET", "/favicon.ico"), PUBLIC),
    # server/web/home.py
    (("GET", "/bench"), STAFF),
    # server/web/audit.py
    (("GET", "/audit"), CHECKER),
    (("GET", "/jobs/{job_id}/trail"), CHECKER),
    (("GET", "/jobs/{job_id}/trail.csv"), CHECKER),
    (("GET", "/samples/{sample_id}/trail"), CHECKER),
    (("GET", "/samples/{sample_id}/trail.csv"), CHECKER),
    (("GET", "/audit/job"), CHECKER),
    # server/web/turnaround.py
    (("GET", "/turnaround"), CHECKER),
    (("GET", "/jobs/{job_id}/turnaround"), CHECKER),
    # server/web/admin_users.py
    (("GET", "/admin/users"), ADMIN),
    (("POST", "/admin/users"), ADMIN),
    (("GET", "/admin/users/{user_id}"), ADMIN),
    (("POST", "/admin/users/{user_id}"), ADMIN),
    (("POST", "/admin/users/{user_id}/active"), ADMIN),
    (("POST", "/admin/users/{user_id}/password"), ADMIN),
    # server/web/admin_access.py
    (("GET", "/admin/access"), ADMIN),
    (("POST", "/admin/sessions/{session_id}/end"), ADMIN),
    (("POST", "/admin/tokens/{token_id}/revoke"), ADMIN),
    # server/web/registers.py: the bench looks tins and instruments up; the admin keeps the registers
    (("GET", "/registers/containers/{code}"), STAFF),
    (("GET", "/registers/containers"), STAFF),
    (("GET", "/registers/equipment/{code}"), STAFF),
    (("GET", "/registers/equipment"), STAFF),
    (("GET", "/registers"), ADMIN),
    (("POST", "/registers/admin/laboratory"), ADMIN),
    (("GET", "/registers/admin/containers"), ADMIN),
    (("POST", "/registers/admin/containers"), ADMIN),
    (("POST", "/registers/admin/containers/{container_id}/tare"), ADMIN),
    (("POST", "/registers/admin/containers/{container_id}/active"), ADMIN),
    (("GET", "/registers/admin/equipment"), ADMIN),
    (("POST", "/registers/admin/equipment"), ADMIN),
    (("POST", "/registers/admin/equipment/{equipment_id}"), ADMIN),
    (("POST", "/registers/admin/equipment/{equipment_id}/active"), ADMIN),
    # server/web/quality.py: anyone signed in looks at the charts; reviewers and admins change things
    (("GET", "/quality"), STAFF),
    (("POST", "/quality/soils"), CHECKER),
    (("GET", "/quality/soils/{soil_id}"), STAFF),
    (("POST", "/quality/soils/{soil_id}"), CHECKER),
    (("POST", "/quality/soils/{soil_id}/samples"), CHECKER),
    (("POST", "/quality/soils/{soil_id}/samples/{sample_id}/unlink"), CHECKER),
    (("POST", "/quality/duplicates"), CHECKER),
    (("POST", "/quality/duplicates/{mark_id}/unmark"), CHECKER),
    (("POST", "/quality/rounds"), CHECKER),
    (("GET", "/quality/rounds/{round_id}"), CHECKER),
    (("POST", "/quality/rounds/{round_id}"), CHECKER),
    (("GET", "/quality/tests/{test_id}/flags"), CHECKER),
    (("GET", "/quality/report.pdf"), CHECKER),
    # server/web/requests.py: requesting tests is registration
    (("GET", "/requests"), CHECKER),
    (("POST", "/requests"), CHECKER),
    # server/web/account.py: a person's own tokens, sessions and password
    (("GET", "/account/tokens"), STAFF),
    (("POST", "/account/tokens"), STAFF),
    (("POST", "/account/tokens/{token_id}/revoke"), STAFF),
    (("GET", "/account/sessions"), STAFF),
    (("POST", "/account/sessions/{session_id}/end"), STAFF),
    (("POST", "/account/sign-out-everywhere"), STAFF),
    (("POST", "/account/password"), STAFF),
)
ROUTE_RULES: dict[tuple[str, str], Rule] = dict(DECLARED)
