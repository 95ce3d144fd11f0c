"""The bench sheets: which inputs each method's page shows, as data rendered by one template.

A sheet is a list of sections; a section is either a table of rows (determinations, trials)
at a JSON path or a few single values. The input names are the readings' JSON paths (see
``server.web.forms``), so what the technician types is exactly what the engine receives.
"""

from __future__ import annotations

from dataclasses import dataclass, field


@dataclass(frozen=True)
class Input:
    key: str
    label: str
    unit: str = ""
    kind: str = "decimal"  # decimal | integer | text

    @property
    def inputmode(self) -> str:
        return {"decimal": "decimal", "integer": "numeric"}.get(self.kind, "text")


@dataclass(frozen=True)
class Rows:
    """A table of repeated readings at ``path`` (a JSON list of objects)."""

    path: str
    title: str
    noun: str
    inputs: tuple[Input, ...]
    rows: int
    result_key: str  # the engine's per-row water contents, shown beside each row
    result_field: str | None = None  # the key inside each per-row result, if rows are objects
    fixed: dict[str, str] = field(default_factory=dict)  # hidden inputs, e.g. the LL method


@dataclass(frozen=True)
class Values:
    """A few single values (percentages from grading) at the top level of the readings."""

    title: str
    inputs: tuple[Input, ...]


Section = Rows | Values

MASSES = (
    Input("container", "Tin", kind="text"),
    Input("tare_g", "Tare", "g"),
    Input("wet_tare_g", "Wet soil + tare", "g"),
    Input("dry_tare_g", "Dry soil + tare", "g"),
)

SHEETS: dict[str, tuple[Section, ...]] = {
    "atterberg": (
        Rows(
            "water_content.determinations",
            "Natural water content",
            "determination",
            MASSES,
            2,
            "water_content_determinations",
        ),
        Rows(
            "liquid_limit.trials",
            "Liquid limit, cup method (three or more trials)",
            "trial",
            (Input("blows", "Blows", kind="integer"), *MASSES),
            5,
            "liquid_limit_trials",
            "water_content",
            fixed={"liquid_limit.method": "ll-cup-multipoint"},
        ),
        Rows(
            "plastic_limit.determinations",
            "Plastic limit",
            "determination",
            MASSES,
            3,
            "plastic_limit_determinations",
        ),
        Values(
            "Grading (from the particle-size test, % by dry mass)",
            (
                Input("clay_fraction", "Finer than 2 µm", "%"),
                Input("fines", "Fines (< 75 µm)", "%"),
                Input("sand", "Sand", "%"),
                Input("gravel", "Gravel", "%"),
            ),
        ),
    ),
}
