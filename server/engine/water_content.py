"""Water content of a soil specimen from its tare, wet and dry masses.

w = (m_wet+tare - m_dry+tare) / (m_dry+tare - m_tare) x 100, in per cent of the dry mass
(ASTM D2216-19, calculation; ISO 17892-1:2014). Every Atterberg test is a set of such
determinations, so the same reader refuses the same bad masses wherever they appear.
"""

from __future__ import annotations

from dataclasses import dataclass

from server.engine.contract import Outcome
from server.engine.readings import MIN_MAGNITUDE, Readings, fmt
from server.engine.uncertainty import Balance, Measured, expanded, u_mean, u_water_content


@dataclass(slots=True)
class Determination:
    """One weighed specimen: container tare, wet mass plus tare, dry mass plus tare (grams)."""

    tare_g: float
    wet_tare_g: float
    dry_tare_g: float
    container: str | None = None

    @property
    def water_content(self) -> float:
        """Water content in per cent of the dry mass (ASTM D2216-19)."""
        return water_content(self.tare_g, self.wet_tare_g, self.dry_tare_g)


def water_content(tare_g: float, wet_tare_g: float, dry_tare_g: float) -> float:
    """Mass of water over mass of dry soil, in per cent (ASTM D2216-19).

    The caller guarantees ``dry_tare_g > tare_g`` (there is dry soil); ``read_determination``
    refuses anything else.
    """
    return (wet_tare_g - dry_tare_g) / (dry_tare_g - tare_g) * 100.0


def _mass(r: Readings, key: str, name: str) -> float | None:
    """A mass in grams, from zero up to the capacity of the balance. Plain JSON numbers within
    it take a short path (the engine runs on every keystroke at the bench); anything else (the
    decimal text the bench stores, a refusal) goes through the full reader, which gives the same
    answer and words the refusal."""
    raw = r.data.get(key)
    if (type(raw) is float or type(raw) is int) and (MIN_MAGNITUDE <= raw <= r.capacity.grams or raw == 0):
        return float(raw)
    return r.number(key, name=name, unit="g", minimum=0.0)


def read_determination(r: Readings) -> Determination | None:
    """Read one mass determination, refusing impossible masses field by field.

    Refused: a mass that is negative or not a number, dry mass plus tare above wet mass plus
    tare (the specimen cannot gain mass in the oven), tare above dry mass plus tare, and dry
    mass plus tare equal to the tare (no dry soil, so no water content can be formed).
    """
    tare = _mass(r, "tare_g", "tare")
    wet = _mass(r, "wet_tare_g", "wet mass plus tare")
    dry = _mass(r, "dry_tare_g", "dry mass plus tare")
    container = r.text("container", max_length=40) if "container" in r.data else None
    if tare is None or wet is None or dry is None:
        return None
    ok = True
    if dry > wet:
        r.refuse("dry_tare_g", f"dry mass plus tare ({fmt(dry, 'g')}) is above wet mass plus tare "
                               f"({fmt(wet, 'g')})")
        ok = False
    if tare > dry:
        r.refuse("tare_g", f"tare ({fmt(tare, 'g')}) is above dry mass plus tare ({fmt(dry, 'g')})")
        ok = False
    elif tare == dry:
        r.refuse("dry_tare_g", f"dry mass plus tare ({fmt(dry, 'g')}) equals the tare: there is no dry soil")
        ok = False
    if not ok:
        return None
    return Determination(tare, wet, dry, container)


def read_determinations(r: Readings, key: str, *, noun: str, min_items: int) -> list[Determination | None]:
    """Read a list of determinations; a refused one stays in its place as None.

    Keeping the places lets the bench show each row's water content beside the row typed,
    while a neighbouring row is still incomplete.
    """
    return [None if item is None else read_determination(item)
            for item in aligned_items(r, key, noun=noun, min_items=min_items)]


def aligned_items(r: Readings, key: str, *, noun: str, min_items: int,
                  max_items: int | None = None) -> list[Readings | None]:
    """The entries of a list of objects, one per typed row: None where the row is not an object."""
    items = r.items(key, noun=noun, min_items=min_items, max_items=max_items)
    raw = r.data.get(key)
    size = len(raw) if isinstance(raw, list | tuple) else 0
    if len(items) == size:
        return list(items)
    slots: list[Readings | None] = [None] * size
    for item in items:
        slots[int(item.loc[-1])] = item
    return slots


def mean(values: list[float]) -> float:
    """Arithmetic mean of the determinations, as D4318 and BS 1377 report a limit."""
    return sum(values) / len(values)


def averaged_determinations(
    r: Readings, out: Outcome, balance: Balance, result_key: str, min_items: int
) -> tuple[list[Determination], Measured] | None:
    """Read determinations and write each water content and, when every row is good, their mean.

    Writes ``{result_key}_determinations`` (one entry per row, None where refused) and
    ``{result_key}`` with its uncertainty (the mean's, from each determination's masses).
    Returns the good determinations and the mean, for a caller that checks their spread.
    """
    dets = read_determinations(r, "determinations", noun="determination", min_items=min_items)
    out.results[f"{result_key}_determinations"] = [None if d is None else d.water_content for d in dets]
    if r.has_errors_under("determinations") or not dets:
        return None
    good = [d for d in dets if d is not None]
    value = mean([d.water_content for d in good])
    u = u_mean([u_water_content(d.tare_g, d.wet_tare_g, d.dry_tare_g, balance.u_mass) for d in good])
    out.results[result_key] = value
    out.results.setdefault("uncertainty", {})[result_key] = expanded(u)
    return good, Measured(value, u)


def water_content_part(r: Readings, out: Outcome, balance: Balance) -> Measured | None:
    """Natural water content: the mean of one or more determinations, with its uncertainty."""
    found = averaged_determinations(r, out, balance, "water_content", min_items=1)
    return None if found is None else found[1]
