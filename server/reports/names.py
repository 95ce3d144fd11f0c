"""Words for people, next to the ids the code keeps (pure: no I/O).

Pages and the PDF show a method, a quality flag, a test's state, an audit event or a role by its
name; the id stays in the API, the exports and a tooltip. Every table here is keyed by the id the
engine, the workflow or the services use, so that a new id without a name is caught by a test
(tests/reports/test_names.py scans the sources for every flag code and audit event). An id
without a name still shows, as readable words made from the id, never as an error.
"""

from __future__ import annotations

from server.engine import METHODS
from server.workflow.states import Role, Status

__all__ = [
    "EVENT_NAMES",
    "FLAG_NAMES",
    "ROLE_NAMES",
    "SEVERITY_MARK",
    "SEVERITY_NAMES",
    "STATE_MARK",
    "STATE_NAMES",
    "article",
    "event_name",
    "flag_name",
    "method_name",
    "plural",
    "role_name",
    "severity_mark",
    "severity_name",
    "state_mark",
    "state_name",
    "with_article",
]


def _words(code: str) -> str:
    """'equipment-calibration-expired' -> 'Equipment calibration expired': an id we have no name for."""
    text = code.replace("_", " ").replace("-", " ").strip()
    return text[:1].upper() + text[1:]


# -- methods ---------------------------------------------------------------------------------


def method_name(method_id: str) -> str:
    """The method's title from the engine's registry ("Liquid limit, fall cone"); its id when unknown."""
    found = METHODS.get(method_id)
    return found.title if found is not None else method_id


# -- quality flags -----------------------------------------------------------------------------

# The name of each check the engine and the services can raise (its message says the detail).
FLAG_NAMES: dict[str, str] = {
    "aashto-not-classified": "AASHTO group not given",
    "above-u-line": "Above the U-line",
    "blows-bands-not-covered": "Blow counts do not span 25",
    "blows-out-of-range": "Blow count outside the method's range",
    "boundary-sieve-missing": "Boundary sieve missing",
    "clay-fraction-outside-readings": "Clay fraction outside the readings",
    "coarsest-sieve-retains": "Coarsest sieve retains soil",
    "composite-correction-extrapolated": "Hydrometer correction extrapolated",
    "cone-remix-needed": "Cone penetrations too far apart: remix",
    "cone-second-drop-needed": "Second cone drop needed",
    "cone-third-drop-needed": "Third cone drop needed",
    "curve-wrong-direction": "Flow curve slopes the wrong way",
    "duplicate-outside-precision": "Duplicate outside the method's precision",
    "equipment-calibration-expired": "Instrument past its calibration date",
    "few-compaction-points": "Few compaction points",
    "fractions-do-not-sum": "Fractions do not add up to 100 %",
    "furnace-temperature-nonstandard": "Furnace temperature not the standard's",
    "grading-diameter-unavailable": "Particle diameter not found",
    "hydrometer-reading-out-of-range": "Hydrometer reading out of range",
    "implausible-liquid-limit": "Implausible liquid limit",
    "implausible-plastic-limit": "Implausible plastic limit",
    "implausible-water-content": "Implausible water content",
    "limit-extrapolated": "Limit extrapolated beyond the trials",
    "linked-value-not-approved": "Linked value not yet approved",
    "near-classification-boundary": "Near a classification boundary",
    "no-peak-before-15pct": "No peak before 15 % strain",
    "no-readings-before-15pct": "No readings up to 15 % strain",
    "one-point-trials-apart": "One-point trials too far apart",
    "particle-density-spread": "Particle density determinations apart",
    "passing-not-monotonic": "Percent passing not decreasing",
    "peak-not-bracketed": "Compaction peak not bracketed",
    "peak-points-same-water-content": "Peak points at the same water content",
    "penetration-out-of-range": "Cone penetration outside the method's range",
    "percent-finer-out-of-bounds": "Percent finer out of bounds",
    "pl-determinations-apart": "Plastic limit determinations apart",
    "plastic-limit-not-below-liquid-limit": "Plastic limit not below the liquid limit",
    "point-above-zero-air-voids": "Point above the zero air-voids line",
    "poor-fit": "Poor fit of the flow curve",
    "reference-soil-out-of-control": "Reference soil out of control",
    "reference-soil-run-rule": "Reference soil run rule",
    "remoulded-stronger": "Remoulded stronger than undisturbed",
    "saturation-above-100": "Degree of saturation above 100 %",
    "shrinkage-bar-cracked": "Shrinkage bar cracked",
    "shrinkage-bar-curled": "Shrinkage bar curled",
    "sieve-mass-loss": "Mass lost in sieving",
    "specimen-slenderness": "Specimen slenderness outside the range",
    "specimen-too-small": "Specimen too small",
    "stopped-before-failure": "Stopped before failure",
    "too-few-sieves": "Too few sieves",
    "too-few-trials": "Too few trials",
    "uscs-name-not-given": "USCS group name not given",
    "water-content-above-liquid-limit": "Water content above the liquid limit",
}

SEVERITY_NAMES: dict[str, str] = {"error": "Error", "warning": "Check"}
# Drawn beside the word, never instead of it (WCAG 1.4.1: colour or a symbol alone says nothing).
SEVERITY_MARK: dict[str, str] = {"error": "✖", "warning": "⚠"}


def flag_name(code: str) -> str:
    """A check's name ("Instrument past its calibration date"); the code in words when unknown."""
    return FLAG_NAMES.get(code) or _words(code)


def severity_name(severity: str) -> str:
    return SEVERITY_NAMES.get(severity, _words(severity))


def severity_mark(severity: str) -> str:
    return SEVERITY_MARK.get(severity, "")


# -- test states -----------------------------------------------------------------------------

# Lower case: they are read inside sentences ("This test is awaiting review").
STATE_NAMES: dict[str, str] = {
    Status.requested: "requested",
    Status.draft: "draft",
    Status.submitted: "awaiting review",
    Status.returned: "returned for correction",
    Status.approved: "approved",
    Status.superseded: "superseded",
    "issued": "issued",  # a report's state, beside the tests'
}
STATE_MARK: dict[str, str] = {
    Status.requested: "○",
    Status.draft: "✎",
    Status.submitted: "⧗",
    Status.returned: "↩",
    Status.approved: "✔",
    Status.superseded: "⊘",
    "issued": "✔",
}


def state_name(status: str) -> str:
    return STATE_NAMES.get(str(status)) or _words(str(status)).lower()


def state_mark(status: str) -> str:
    return STATE_MARK.get(str(status), "")


# -- roles -----------------------------------------------------------------------------------

ROLE_NAMES: dict[str, str] = {
    Role.technician: "Technician",
    Role.reviewer: "Reviewer",
    Role.admin: "Laboratory administrator",
}


def role_name(role: str) -> str:
    return ROLE_NAMES.get(str(role)) or _words(str(role))


# -- audit events ----------------------------------------------------------------------------

# (entity, action) of every audit.record(...) call in server/services, in the past tense a log reads.
EVENT_NAMES: dict[tuple[str, str], str] = {
    ("api_token", "create"): "API token created",
    ("api_token", "revoke"): "API token revoked",
    ("client", "create"): "Client added",
    ("client", "update"): "Client changed",
    ("container", "activate"): "Container brought back into use",
    ("container", "create"): "Container added",
    ("container", "deactivate"): "Container taken out of use",
    ("container", "reweigh"): "Container re-weighed",
    ("equipment", "activate"): "Instrument brought back into use",
    ("equipment", "create"): "Instrument added",
    ("equipment", "deactivate"): "Instrument taken out of use",
    ("equipment", "update"): "Instrument changed",
    ("job", "create"): "Job opened",
    ("job", "import"): "Schedule imported",
    ("job", "update"): "Job changed",
    ("lab_test", "amend"): "Approved result amended",
    ("lab_test", "approve"): "Test approved",
    ("lab_test", "discard_offline"): "Offline entry discarded",
    ("lab_test", "open_amendment"): "Amendment opened",
    ("lab_test", "readings"): "Readings saved",
    ("lab_test", "request"): "Test requested",
    ("lab_test", "return"): "Test returned for correction",
    ("lab_test", "submit"): "Test handed in for review",
    ("lab_test", "supersede"): "Revision superseded",
    ("laboratory", "update"): "Laboratory details changed",
    ("location", "create"): "Location added",
    ("location", "update"): "Location changed",
    ("proficiency_round", "create"): "Proficiency round added",
    ("proficiency_round", "update"): "Proficiency round changed",
    ("quality_duplicate", "mark"): "Duplicate marked",
    ("quality_duplicate", "unmark"): "Duplicate unmarked",
    ("reference_sample", "link"): "Reference sample linked",
    ("reference_sample", "unlink"): "Reference sample unlinked",
    ("reference_soil", "create"): "Reference soil added",
    ("reference_soil", "update"): "Reference soil changed",
    ("report", "issue"): "Report issued",
    ("report", "reissue"): "Report re-issued",
    ("report", "supersede"): "Report superseded",
    ("report-render", "fail"): "Report render failed",
    ("report-render", "queue"): "Report render queued",
    ("report-render", "retry"): "Report render retried",
    ("sample", "create"): "Sample added",
    ("sample", "receive"): "Sample received",
    ("sample", "update"): "Sample changed",
    ("sample", "withdraw"): "Sample withdrawn",
    ("session", "end"): "Session ended",
    ("session", "sign-in"): "Signed in",
    ("session", "sign-out"): "Signed out",
    ("share_link", "create"): "Share link created",
    ("share_link", "revoke"): "Share link revoked",
    ("sign-in", "refused"): "Sign-in refused",
    ("user", "activate"): "User account reactivated",
    ("user", "create"): "User added",
    ("user", "deactivate"): "User account deactivated",
    ("user", "password"): "Password changed",
    ("user", "rename"): "User renamed",
    ("user", "role"): "Role changed",
    ("user", "sign-out-everywhere"): "Signed out everywhere",
}


def event_name(entity: str, action: str) -> str:
    """An audit event in words ("Test approved"); "Lab test: approve" made from the ids when unknown."""
    return EVENT_NAMES.get((entity, action)) or f"{_words(entity)}: {action.replace('_', ' ')}"


# -- counting and articles -------------------------------------------------------------------


def _plural_of(word: str) -> str:
    """The regular English plural (common practice): tests, boxes, batches, quantities, days."""
    lower = word.lower()
    if lower.endswith(("s", "x", "z", "ch", "sh")):
        return word + "es"
    if lower.endswith("y") and len(word) > 1 and lower[-2] not in "aeiou":
        return word[:-1] + "ies"
    return word + "s"


def plural(n: int, singular: str, plural_form: str | None = None) -> str:
    """'1 day', '4 tests', '0 samples': the count and the noun that agrees with it."""
    noun = singular if n == 1 else (plural_form or _plural_of(singular))
    return f"{n} {noun}"


# Letters whose spoken name starts with a vowel sound: "an LL test", "an MDD", but "a PI".
_VOWEL_LETTERS = set("AEFHILMNORSX")
# Words whose first sound is not what their first letter suggests (common practice, from memory).
_A_BEFORE = ("uni", "use", "usu", "ure", "uti", "eu", "one", "once", "ewe")
_AN_BEFORE = ("hour", "honest", "honour", "honor", "heir")


def article(word: str) -> str:
    """'a' or 'an' before ``word``, by its first sound: an instrument, a test, a unit, an hour."""
    head = word.strip().split(" ", 1)[0].strip("\"'“(")
    if not head:
        return "a"
    if head.isupper() and len(head) > 1 and head.isalpha():
        return "an" if head[0] in _VOWEL_LETTERS else "a"
    lower = head.lower()
    if lower.startswith(_AN_BEFORE):
        return "an"
    if lower.startswith(_A_BEFORE):
        return "a"
    return "an" if lower[0] in "aeiou" else "a"


def with_article(word: str) -> str:
    """'an instrument', 'a test'."""
    return f"{article(word)} {word}"
