"""Indicative correlations: values, sources, and the label that keeps them apart from results."""

from __future__ import annotations

import pytest

from server.engine.interpretation import (
    cc_skempton,
    cc_terzaghi_peck,
    cu_ratio_nc,
    interpret,
    remoulded_cu_kpa,
    swell_class,
    swell_potential,
)


def test_compression_index_from_the_liquid_limit() -> None:
    # Terzaghi & Peck (1967): 0.009 (LL - 10); Skempton (1944): 0.007 (LL - 10); LL 40 -> 0.27, 0.21.
    assert cc_terzaghi_peck(40) == pytest.approx(0.27)
    assert cc_skempton(40) == pytest.approx(0.21)


def test_remoulded_strength_is_a_hundred_times_larger_at_the_plastic_limit() -> None:
    # Wroth & Wood (1978): about 1.7 kPa at LL and 100 times that at PL (REFERENCES.md, from memory).
    assert remoulded_cu_kpa(1.0) == pytest.approx(1.7, abs=0.02)
    assert remoulded_cu_kpa(0.0) / remoulded_cu_kpa(1.0) == pytest.approx(100, rel=0.01)


def test_undrained_strength_ratio_of_a_normally_consolidated_clay() -> None:
    # Skempton (1957): 0.11 + 0.0037 PI; PI 20 -> 0.184.
    assert cu_ratio_nc(20) == pytest.approx(0.184)


def test_swell_potential_and_its_class() -> None:
    # Seed, Woodward & Lundgren (1962): S = 2.16e-3 PI^2.44; PI 30 -> 30^2.44 = 4019.5,
    # S = 8.68 % (computed), "high" (classes from memory: 5-25 % high).
    assert swell_potential(30) == pytest.approx(8.68, abs=0.01)
    assert swell_class(swell_potential(30)) == "high"
    assert swell_class(1.5) == "low" and swell_class(25.0) == "high" and swell_class(26.0) == "very high"


def test_every_entry_has_value_unit_source_and_says_indicative() -> None:
    notes = interpret(
        {"nonplastic": False, "liquid_limit": 39.67, "plasticity_index": 19.0, "liquidity_index": 0.75}
    )
    assert set(notes) == {
        "compression_index_undisturbed",
        "compression_index_remoulded",
        "remoulded_undrained_strength_kpa",
        "undrained_strength_ratio_nc",
        "swell_potential",
    }
    for entry in notes.values():
        assert {"value", "unit", "source"} <= set(entry)
        assert "indicative" in entry["basis"]
    assert notes["compression_index_undisturbed"]["value"] == pytest.approx(0.27)  # reported LL 40, T&P 1967


def test_a_nonplastic_soil_gets_no_correlations() -> None:
    assert interpret({"nonplastic": True, "liquid_limit": 30.0}) == {}


def test_notes_a_liquidity_index_outside_the_correlation_range() -> None:
    notes = interpret({"nonplastic": False, "plasticity_index": 10.0, "liquidity_index": 1.4})
    assert "extrapolated" in notes["remoulded_undrained_strength_kpa"]["note"]
