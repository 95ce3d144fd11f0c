"""The one place a value is formatted for people: pages, the bench and the PDF call it (pure).

- A result by its reporting rule (``server.engine.rounding.reported``, the rule each result key
  names), never "-0.0": a value that rounds to zero has no sign (common practice). The text
  keeps the ASCII hyphen-minus, which exports and spreadsheets read as a number; ``people`` (the
  ``finalize`` of the pages' and the PDF's Jinja environments) prints it as a real minus sign,
  U+2212 (ISO 80000-2:2019 item 2-9.2, from memory).
- A value with its expanded uncertainty as a metrologist writes it (``with_u``): U to two
  significant figures and the value rounded to the same decimal place (GUM, JCGM 100:2008,
  7.2.6); where the reporting rule rounds the value coarser than that, the value as reported and
  U still to two figures, marked so the PDF can say why. Never "± 0".
- Readings as they were typed (``typed``), times (``moment``, ``when``), depths.
- Symbols as typeset text (``typeset``): σ′v, exponents as superscripts, the minus sign.

Values are stored at full precision; only the text made here is rounded.
"""

from __future__ import annotations

import math
import re
from dataclasses import dataclass
from datetime import date, datetime
from decimal import Decimal
from typing import Any

from markupsafe import Markup, escape

from server.engine.readings import as_entered
from server.engine.rounding import DECIMALS, reported, round_half_up

__all__ = [
    "DASH",
    "MINUS",
    "NP",
    "Measured",
    "depth",
    "entered",
    "finite",
    "humanise",
    "moment",
    "number",
    "people",
    "show",
    "shown",
    "signed",
    "two_figures",
    "typed",
    "typeset",
    "when",
    "with_u",
]

DASH = "—"
NP = "NP"
MINUS = "\u2212"

_ZERO = re.compile(r"^-(0(?:\.0*)?)$")


def finite(value: Any) -> float | None:
    """A number that can be printed (not a truth value, not NaN or infinite), else None."""
    if isinstance(value, bool) or not isinstance(value, int | float):
        return None
    f = float(value)
    return f if math.isfinite(f) else None


_NEGATIVE = re.compile(r"^-(?=\d)[\d.,]*\*?$")


def signed(text: str) -> str:
    """A rounded number's text without a signed zero: "-0.0" -> "0.0", "-1.2" stays."""
    zero = _ZERO.match(text)
    return zero.group(1) if zero else text


def people(value: Any) -> Any:
    """What a template prints, for people: a negative number's text with a real minus sign
    ("-1.2" -> "−1.2"); anything else (markup, words, "A-6") as it is. The Jinja ``finalize`` of
    the pages and the PDF, so exports keep the hyphen-minus a spreadsheet reads."""
    if isinstance(value, str) and not hasattr(value, "__html__") and _NEGATIVE.match(value):
        return MINUS + value[1:]
    return value


def number(key: str, value: Any) -> str:
    """A result rounded by its key's rule, no signed zero; "—" when absent or not a number."""
    num = finite(value)
    return DASH if num is None else signed(reported(key, num))


def show(key: str, value: Any) -> str:
    """A result value as printed: rounded by its key's rule, text as is, "—" when absent."""
    if value is None or value == "":
        return DASH
    if isinstance(value, bool):
        return "yes" if value else "no"
    if finite(value) is not None:
        return number(key, value)
    return str(value)


def shown(value: Any, key: str) -> str:
    """The pages' ``shown`` filter: a number by the rule of ``key``, other values as their text."""
    if isinstance(value, bool) or (value is not None and not isinstance(value, int | float)):
        return str(value)
    return number(key, value)


def typed(value: Any) -> str:
    """A reading as entered ("44.20" as typed at the bench; a JSON number by the shortest text
    that gives it back, see ``server.engine.readings.as_entered``); "—" when absent."""
    if value is None or value == "":
        return DASH
    if isinstance(value, bool):
        return "yes" if value else "no"
    if isinstance(value, list | tuple):
        return ", ".join(typed(v) for v in value) if value else DASH
    return as_entered(value) or DASH


def entered(value: Any) -> str:
    """The pages' ``entered`` filter: a stored reading as it was entered; a placeholder (an absent
    value of a comparison) as its own text."""
    if value is None or isinstance(value, str | int | float | list | tuple):
        return as_entered(value)
    return str(value)


def when(value: datetime | date | None) -> str:
    """A stored time (UTC) or date for the pages: "2026-12-04 22:41 UTC", "2026-12-04", or "—"."""
    if value is None:
        return DASH
    if isinstance(value, datetime):
        return value.strftime("%Y-%m-%d %H:%M UTC")
    return value.isoformat()


def moment(iso: str) -> str:
    """An ISO 8601 time as "2025-03-14 15:58 UTC" (or with its offset); other text as given."""
    try:
        at = datetime.fromisoformat(iso)
    except ValueError:
        return iso
    text = at.strftime("%Y-%m-%d %H:%M")
    offset = at.utcoffset()
    if offset is None:
        return text
    if not offset:
        return f"{text} UTC"
    minutes = int(offset.total_seconds() // 60)
    sign = "+" if minutes > 0 else MINUS
    return f"{text} UTC{sign}{abs(minutes) // 60:02d}:{abs(minutes) % 60:02d}"


def depth(metres: float) -> str:
    """A sample depth in metres to 0.01 m (common practice for sample depths)."""
    return signed(f"{round_half_up(metres, 2):.2f}")


_UNIT_SUFFIXES = (
    ("_kpa", "kPa"),
    ("_nm", "N·m"),
    ("_mm", "mm"),
    ("_g", "g"),
    ("_m", "m"),
    ("_n", "N"),
    ("_c", "°C"),
    ("_min", "min"),
    ("_pct", "%"),
    ("_mg_m3", "Mg/m³"),
    ("_cm3", "cm³"),
)


def humanise(key: str) -> str:
    """ "wet_tare_g" -> "Wet tare (g)": a readable label for a key we have no label for."""
    unit = ""
    base = key
    for suffix, name in _UNIT_SUFFIXES:
        if key.lower().endswith(suffix) and len(key) > len(suffix):
            base, unit = key[: -len(suffix)], name
            break
    words = base.replace("_", " ").replace("-", " ").strip()
    words = words[:1].upper() + words[1:]
    return f"{words} ({unit})" if unit else words


# -- a value with its expanded uncertainty -----------------------------------------------------


def _fixed(value: float, decimals: int) -> str:
    """``value`` rounded half up at ``decimals`` places (negative: tens, hundreds), with its sign."""
    return signed(f"{round_half_up(value, decimals):.{max(decimals, 0)}f}")


def two_figures(u: float) -> tuple[str, int]:
    """U to two significant figures (GUM 7.2.6) and the decimal place it ends at: 0.0123 ->
    ("0.012", 3), 28.05 -> ("28", 0), 0.0996 -> ("0.10", 2), 123 -> ("120", -1)."""
    decimals = 1 - Decimal(repr(u)).adjusted()
    rounded = round_half_up(u, decimals)
    if Decimal(repr(rounded)).adjusted() > Decimal(repr(u)).adjusted():  # 0.0996 -> 0.100: one figure fewer
        decimals -= 1
        rounded = round_half_up(u, decimals)
    return f"{rounded:.{max(decimals, 0)}f}", decimals


@dataclass(frozen=True)
class Measured:
    """A value as shown with its expanded uncertainty.

    ``u`` is empty when no uncertainty can be shown (none given, zero, not a number).
    ``coarser`` marks a value printed as the reporting rule rounds it, coarser than the last
    figure of U: the PDF says so in a note.
    """

    value: str
    u: str = ""
    k: str = ""
    coarser: bool = False

    @property
    def u_text(self) -> str:
        """ "± 0.34 (k = 2)", or "" without an uncertainty."""
        if not self.u:
            return ""
        return f"± {self.u} (k = {self.k})" if self.k else f"± {self.u}"

    def __str__(self) -> str:
        value = people(self.value)
        return f"{value} {self.u_text}" if self.u else value


def with_u(key: str, value: Any, u: Any, k: Any = None) -> Measured:
    """``value`` (a result of ``key``) with its expanded uncertainty ``u`` at coverage factor ``k``.

    U to two significant figures; the value to the same decimal place, unless the reporting rule
    of ``key`` rounds coarser: then the value as reported, and ``coarser`` set (GUM 7.2.6 asks the
    value to be consistent with U; the reporting rule is what the method reports)."""
    num = finite(value)
    spread = finite(u)
    k_num = finite(k)
    k_text = f"{k_num:g}" if k_num is not None else ""
    if num is None:
        return Measured(show(key, value))
    if spread is None or spread <= 0:
        return Measured(number(key, num), k=k_text)
    u_text, u_decimals = two_figures(spread)
    rule = DECIMALS.get(key, 2)
    if rule < u_decimals:
        return Measured(number(key, num), u_text, k_text, coarser=True)
    return Measured(_fixed(num, u_decimals), u_text, k_text)


# -- symbols ---------------------------------------------------------------------------------

_RULES: tuple[tuple[re.Pattern[str], str], ...] = (
    (re.compile(r"sigma(?:'|&#39;)v"), "σ′<sub>v</sub>"),  # after escaping, ' is &#39;
    (re.compile(r"(?<![\w.])(\d+(?:\.\d+)?)e-(\d+)\b"), "\\1 × 10<sup>" + MINUS + "\\2</sup>"),
    (re.compile(r"\^(-?)(\d+(?:\.\d+)?)"), "<sup>\\1\\2</sup>"),
    (re.compile(r"\bcu\b"), "c<sub>u</sub>"),
    (re.compile(r"\bCc\b"), "C<sub>c</sub>"),
    (re.compile(r"(?<=[\s(])-(?=[\s\d])"), MINUS),
    (re.compile(r"<sup>-"), "<sup>" + MINUS),
)


def typeset(text: str) -> Markup:
    """Plain formula text as typeset markup: "cu/sigma'v" -> cᵤ/σ′ᵥ with subscripts, "PI^2.44" ->
    PI with a superscript, "2.16e-3" -> 2.16 × 10⁻³, "(LL - 10)" with a minus sign. The text is
    escaped first; only the tags written here are markup."""
    out = str(escape(text))
    for pattern, replacement in _RULES:
        out = pattern.sub(replacement, out)
    return Markup(out)
