"""z scores and verdicts of proficiency rounds (server/quality/proficiency.py)."""

from __future__ import annotations

import pytest

from server.quality import proficiency


@pytest.mark.parametrize(
    ("result", "z", "verdict"),
    [
        # z = (x - X) / σpt with X = 21.0, σpt = 1.2 (ISO 13528:2015 cl. 9.4, from memory); hand-worked
        (21.6, 0.5, "satisfactory"),
        (23.4, 2.0, "satisfactory"),  # |z| <= 2 (ISO 13528:2015 cl. 9.4.1, from memory)
        (24.0, 2.5, "questionable"),  # 2 < |z| < 3
        (17.4, -3.0, "unsatisfactory"),  # |z| >= 3
        (25.2, 3.5, "unsatisfactory"),
    ],
)
def test_a_result_gets_its_z_and_the_verdict_of_its_band(result: float, z: float, verdict: str) -> None:
    found = proficiency.z_score(result, 21.0, 1.2)
    assert found == pytest.approx(z)
    assert proficiency.verdict(found) == verdict


@pytest.mark.parametrize("sigma", [0.0, -1.0, float("nan")])
def test_a_round_without_a_positive_sigma_is_refused(sigma: float) -> None:
    with pytest.raises(ValueError):
        proficiency.z_score(21.0, 20.0, sigma)
