"""Benchmark of the engine: the full result set of many fictional samples through ``calculate``.

Run from the repository root::

    python tests/benchmarks/bench_engine.py [--samples N] [--seed S] [--check]

Each sample is a fictional soil with a complete set of readings for the methods a laboratory
runs on it: ``atterberg`` (water content, one of the three liquid-limit methods, plastic limit,
clay fraction and fractions), ``grading`` (sieving with a hydrometer analysis), ``vane`` and
``unconfined-compression`` (undisturbed and remoulded), and ``classification`` (fed from the
grading and the reported limits, as the services would feed it), then the S12 methods:
``particle-density`` (two pycnometer determinations), ``linear-shrinkage``, ``density`` (two
specimens, with a particle density), ``loss-on-ignition`` (two crucibles) and ``compaction`` (five
points typed out of order, with air-voids lines). Methods missing from the registry are skipped
and named.

The readings are generated (fixed seed) and prepared before timing: the classification
readings come from an untimed pass through ``grading`` and ``atterberg``, which also checks that
every generated sample is accepted. The timed pass then calls ``calculate`` once per method
per sample and reports the mean time per sample (target below 0.5 ms), its spread, and the
share of each method. Calls are timed on this process's CPU clock by default, so that other
work on a shared machine does not count (``--clock wall`` for elapsed time). ``--check`` exits
with status 1 when the target is missed.

Not collected by pytest (the file is named ``bench_*.py``).
"""

from __future__ import annotations

import argparse
import gc
import math
import random
import statistics
import sys
import time
from collections.abc import Callable
from pathlib import Path
from typing import Any

sys.path.insert(0, str(Path(__file__).resolve().parents[2]))

from server.engine import METHODS, InputError, calculate  # noqa: E402
from server.engine.indices import reported_limit  # noqa: E402

Readings = dict[str, Any]
TARGET_MS = 0.5
"""The target is for the index set a sample's limits and classification need (the first five
methods); the density, shrinkage, organic content and compaction methods are timed beside it."""
INDEX_SET = ("atterberg", "grading", "vane", "unconfined-compression", "classification")
METHOD_ORDER = (
    *INDEX_SET,
    "particle-density",
    "linear-shrinkage",
    "density",
    "loss-on-ignition",
    "compaction",
)


# -- generation (fictional soils; none of this is timed) --------------------------------------------


def _determination(rng: random.Random, w: float) -> Readings:
    """A mass determination giving water content ``w`` % (ASTM D2216 formula), masses to 0.01 g."""
    tare = round(rng.uniform(10.0, 20.0), 2)
    dry = rng.uniform(15.0, 40.0)
    return {
        "container": f"T-{rng.randint(1, 99)}",
        "tare_g": tare,
        "dry_tare_g": round(tare + dry, 2),
        "wet_tare_g": round(tare + dry * (1.0 + w / 100.0), 2),
    }


def _liquid_limit(rng: random.Random, ll: float) -> Readings:
    kind = rng.random()
    if kind < 0.5:  # cup, multipoint: one blow count in each D4318 band, flow index 5-20
        flow = rng.uniform(5.0, 20.0)
        blows = [rng.randint(26, 34), rng.randint(21, 29), rng.randint(16, 24)]
        trials = [
            {"blows": n, **_determination(rng, ll - flow * math.log10(n / 25.0) + rng.gauss(0.0, 0.15))}
            for n in blows
        ]
        return {"method": "ll-cup-multipoint", "trials": trials}
    if kind < 0.75:  # cup, one point: two trials, N 20-30, LL = w (N/25)^0.121
        trials = []
        for _ in range(2):
            n = rng.randint(20, 30)
            trials.append({"blows": n, **_determination(rng, ll / (n / 25.0) ** 0.121 + rng.gauss(0.0, 0.1))})
        return {"method": "ll-cup-one-point", "trials": trials}
    slope = rng.uniform(0.6, 1.6)  # % water content per mm of penetration, 80 g / 30° cone
    trials = []
    for p in (15.5, 18.5, 21.5, 24.0):
        p = p + rng.uniform(-0.5, 0.5)
        drops = [round(p, 1), round(p + rng.uniform(-0.3, 0.3), 1)]
        trials.append({"penetration_mm": drops, **_determination(rng, ll + slope * (p - 20.0))})
    return {"method": "ll-cone", "cone": "80g-30deg", "trials": trials}


SIEVES_MM = (37.5, 19.0, 9.5, 4.75, 2.0, 0.85, 0.425, 0.25, 0.15, 0.075)


def _grading(rng: random.Random, fines: float, sand: float, gravel: float, clay: float) -> Readings:
    """Sieving of 500 g washed on 75 µm, and a 50 g hydrometer specimen of the soil passing 2 mm."""
    sand_share = {2.0: 0.85, 0.85: 0.65, 0.425: 0.45, 0.25: 0.3, 0.15: 0.15, 0.075: 0.0}
    gravel_share = {37.5: 1.0, 19.0: 0.7, 9.5: 0.3, 4.75: 0.0}
    passing = [
        100.0 - gravel * (1.0 - gravel_share[s]) if s in gravel_share else fines + sand * sand_share[s]
        for s in SIEVES_MM
    ]
    dry = 500.0
    retained = [round((a - b) * dry / 100.0, 1) for a, b in zip([100.0, *passing[:-1]], passing, strict=True)]
    pan = round(rng.uniform(0.2, 1.5), 1)
    sieve = {
        "dry_mass_g": dry,
        "washed_dry_mass_g": round(sum(retained) + pan, 1),
        "pan_g": pan,
        "sieves": [{"size_mm": s, "retained_g": m} for s, m in zip(SIEVES_MM, retained, strict=True)],
    }
    p2 = passing[SIEVES_MM.index(2.0)]
    first, last = 0.95 * fines / p2 * 100.0, 0.8 * clay / p2 * 100.0  # % of the specimen
    minutes = (1, 2, 5, 15, 30, 60, 250, 1440)
    span = math.log(1440.0)
    readings = []
    for m in minutes:
        pct = first + (last - first) * math.log(m) / span
        readings.append(
            {
                "minutes": m,
                "reading": round(5.0 + pct * 0.5, 1),  # Gs 2.65: a = 1, W 50 g
                "temperature_c": round(rng.uniform(19.5, 22.5), 1),
            }
        )
    hydrometer = {
        "dry_mass_g": 50.0,
        "specific_gravity": 2.65,
        "meniscus_correction": 1.0,
        "zero_readings": [{"temperature_c": 20.0, "reading": 5.0}],
        "readings": readings,
    }
    return {"sieve": sieve, "hydrometer": hydrometer}


def _vane(rng: random.Random, cu: float, st: float) -> Readings:
    """Torques for cu (kPa) on a 12.7 x 25.4 mm vane: T = cu pi D^2 (H/2 + D/6) (REFERENCES.md)."""
    d, h = 0.0127, 0.0254
    k = math.pi * d * d * (h / 2.0 + d / 6.0) * 1000.0  # N·m per kPa
    return {
        "diameter_mm": 12.7,
        "height_mm": 25.4,
        "torque_resolution_nm": 0.0001,
        "undisturbed": {"torque_nm": round(cu * k, 4)},
        "remoulded": {"torque_nm": round(cu / st * k, 4)},
    }


def _ucs_specimen(qu: float, strain_at_peak: float) -> Readings:
    """A 38 x 76 mm specimen loaded to 15 % strain: stress qu (e/ef) exp(1 - e/ef), area corrected."""
    d, h = 38.0, 76.0
    area0 = math.pi * (d / 1000.0) ** 2 / 4.0
    readings = []
    for i in range(31):
        e = i * 0.005
        stress = qu * (e / strain_at_peak) * math.exp(1.0 - e / strain_at_peak)
        readings.append(
            {"deformation_mm": round(e * h, 2), "load_n": round(stress * 1000.0 * area0 / (1.0 - e), 1)}
        )
    return {"diameter_mm": d, "height_mm": h, "readings": readings}


def _pycnometer(rng: random.Random, gs: float) -> Readings:
    """A small-pycnometer determination of solids of specific gravity ``gs`` at the temperature of the
    water: m3 = m4 + ms (1 - 1/Gt) (ASTM D854 eq. 1 rearranged), masses to 0.01 g."""
    m1 = rng.uniform(28.0, 32.0)
    ms = rng.uniform(9.0, 11.0)
    m4 = m1 + rng.uniform(49.0, 51.0)
    return {
        "pycnometer_g": round(m1, 2),
        "pycnometer_soil_g": round(m1 + ms, 2),
        "pycnometer_soil_water_g": round(m4 + ms * (1.0 - 1.0 / gs), 2),
        "pycnometer_water_g": round(m4, 2),
        "temperature_c": round(rng.uniform(19.0, 23.0), 1),
    }


def _compaction(rng: random.Random, gs: float, pl: float) -> Readings:
    """Five points in a 944 cm³ mould about an optimum near the plastic limit, dry density a parabola."""
    optimum = max(8.0, pl - rng.uniform(2.0, 5.0))
    mdd = rng.uniform(1.65, 1.95)
    points = []
    for step in (-4.0, -2.0, 0.0, 2.0, 4.0):
        w = optimum + step + rng.uniform(-0.5, 0.5)
        rho_d = mdd - 0.004 * (w - optimum) ** 2
        points.append(
            {
                "mould_soil_g": round(4250.0 + 944.0 * rho_d * (1.0 + w / 100.0), 1),
                "determinations": [_determination(rng, w)],
            }
        )
    rng.shuffle(points)
    return {
        "effort": "standard",
        "mould_volume_cm3": 944.0,
        "mould_g": 4250.0,
        "particle_density_mg_m3": round(gs, 2),
        "points": points,
    }


def generate(n: int, seed: int) -> list[dict[str, Readings]]:
    """Raw readings of ``n`` fictional samples (classification is added by ``prepare``)."""
    rng = random.Random(seed)
    samples = []
    for _ in range(n):
        ll = rng.uniform(24.0, 85.0)
        pl = rng.uniform(12.0, min(35.0, ll - 5.0))
        w = pl + rng.uniform(-0.1, 1.1) * (ll - pl)
        fines = rng.uniform(15.0, 95.0)
        gravel = rng.uniform(0.0, 0.4) * (100.0 - fines)
        sand = 100.0 - fines - gravel
        clay = rng.uniform(0.15, 0.6) * fines
        cu = rng.uniform(10.0, 120.0)
        st = rng.uniform(1.5, 8.0)
        gs = rng.uniform(2.60, 2.80)
        rho = gs * (1.0 + w / 100.0) / (1.0 + gs * w / 100.0 / rng.uniform(0.9, 0.99))  # saturation 90-99 %
        loi = rng.uniform(0.1, 1.0)  # g lost from 10 g of dry soil: 1 % to 10 % organic
        samples.append(
            {
                "atterberg": {
                    "water_content": {
                        "determinations": [_determination(rng, w), _determination(rng, w + 0.3)]
                    },
                    "liquid_limit": _liquid_limit(rng, ll),
                    "plastic_limit": {
                        "determinations": [_determination(rng, pl - 0.1), _determination(rng, pl + 0.1)]
                    },
                },
                "grading": _grading(rng, fines, sand, gravel, clay),
                "vane": _vane(rng, cu, st),
                "unconfined-compression": {
                    "undisturbed": _ucs_specimen(2.0 * cu, rng.uniform(0.03, 0.08)),
                    "remoulded": _ucs_specimen(2.0 * cu / st, rng.uniform(0.08, 0.12)),
                    "load_resolution_n": 0.1,
                },
                "particle-density": {"determinations": [_pycnometer(rng, gs), _pycnometer(rng, gs)]},
                "linear-shrinkage": {  # LS about 0.47 PI (common practice, from memory)
                    "mould_length_mm": 140.0,
                    "oven_dry_length_mm": round(140.0 * (1.0 - 0.0047 * (ll - pl)), 1),
                    "condition": "intact",
                },
                "density": {
                    "specimens": [
                        {"mass_g": round(rho * v, 2), "diameter_mm": 38.0, "height_mm": 76.0}
                        for v in (math.pi * 38.0**2 * 76.0 / 4000.0,) * 2
                    ],
                    "water_content": {"determinations": [_determination(rng, w)]},
                    "particle_density_mg_m3": round(gs, 2),
                },
                "loss-on-ignition": {
                    "determinations": [
                        {
                            "crucible_g": c,
                            "crucible_dry_g": c + 10.0,
                            "crucible_ignited_g": round(c + 10.0 - loi, 3),
                        }
                        for c in (round(rng.uniform(18.0, 24.0), 3), round(rng.uniform(18.0, 24.0), 3))
                    ],
                    "furnace_c": 440,
                },
                "compaction": _compaction(rng, gs, pl),
            }
        )
    return samples


def prepare(samples: list[dict[str, Readings]], methods: list[str]) -> None:
    """Untimed: fill the fractions and the classification readings from grading and atterberg."""
    for i, sample in enumerate(samples):
        fractions: Readings = {}
        if "grading" in methods:
            g = _accepted("grading", sample["grading"], i)
            fractions = {k: g[k] for k in ("fines", "sand", "gravel") if g.get(k) is not None}
            if g.get("clay_fraction"):
                sample["atterberg"]["clay_fraction"] = min(g["clay_fraction"], g["fines"])
            for key in ("cu", "cc", "percent_passing_2mm", "percent_passing_0_425mm"):
                if g.get(key) is not None:
                    fractions[key] = g[key]
        sample["atterberg"].update({k: fractions[k] for k in ("fines", "sand", "gravel") if k in fractions})
        a = _accepted("atterberg", sample["atterberg"], i) if "atterberg" in methods else {}
        limits: Readings
        if a.get("nonplastic"):
            limits = {"nonplastic": True}
        elif "liquid_limit" in a:
            limits = {
                "liquid_limit": reported_limit(a["liquid_limit"]),
                "plastic_limit": reported_limit(a["plastic_limit"]),
            }
        else:
            limits = {"liquid_limit": 45.0, "plastic_limit": 22.0}  # atterberg not registered
        sample["classification"] = {**limits, **fractions}
        if "classification" in methods:
            _accepted("classification", sample["classification"], i)
        for m in ("particle-density", "linear-shrinkage", "density", "loss-on-ignition", "compaction"):
            if m in methods:
                _accepted(m, sample[m], i)


def _accepted(method_id: str, readings: Readings, i: int) -> dict[str, Any]:
    try:
        return calculate(method_id, readings).results
    except InputError as refused:
        raise SystemExit(f"generator bug: sample {i} refused by {method_id}: {refused}") from refused


# -- timing ---------------------------------------------------------------------------------------


def run(
    samples: list[dict[str, Readings]], methods: list[str], clock: Callable[[], int] = time.perf_counter_ns
) -> tuple[dict[str, list[int]], list[int]]:
    """Time ``calculate`` per method and per sample (ns); the full set of one sample at a time."""
    per_method: dict[str, list[int]] = {m: [] for m in methods}
    per_sample: list[int] = []
    for sample in samples:
        total = 0
        for m in methods:
            readings = sample[m]
            t0 = clock()
            calculate(m, readings)
            dt = clock() - t0
            per_method[m].append(dt)
            total += dt
        per_sample.append(total)
    return per_method, per_sample


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0] if __doc__ else None)
    parser.add_argument("--samples", type=int, default=10_000, help="number of samples (default 10000)")
    parser.add_argument("--seed", type=int, default=2487, help="seed of the generator (default 2487)")
    parser.add_argument(
        "--clock",
        choices=("cpu", "wall"),
        default="cpu",
        help="cpu: this process's CPU time, steady on a busy machine (default)",
    )
    parser.add_argument(
        "--check", action="store_true", help=f"exit 1 when the mean time per sample is {TARGET_MS} ms or more"
    )
    args = parser.parse_args(argv)

    methods = [m for m in METHOD_ORDER if m in METHODS]
    missing = [m for m in METHOD_ORDER if m not in METHODS]
    print(f"engine benchmark: {args.samples} samples, seed {args.seed}, Python {sys.version.split()[0]}")
    print(
        f"methods: {', '.join(methods)}"
        + (f"  (not registered, skipped: {', '.join(missing)})" if missing else "")
    )

    t0 = time.perf_counter()
    samples = generate(args.samples, args.seed)
    prepare(samples, methods)
    print(f"generated and checked in {time.perf_counter() - t0:.1f} s (not timed below)")

    clock = time.process_time_ns if args.clock == "cpu" else time.perf_counter_ns
    run(samples[: min(200, len(samples))], methods, clock)  # warm-up
    gc.collect()
    wall0 = time.perf_counter()
    per_method, per_sample = run(samples, methods, clock)
    wall = time.perf_counter() - wall0

    n = len(per_sample)
    mean_ms = statistics.fmean(per_sample) / 1e6
    q = statistics.quantiles(per_sample, n=100) if n >= 2 else [per_sample[0]] * 99
    total_ns = sum(per_sample)
    print(f"clock: {args.clock} time per call; the timed pass took {wall:.1f} s of wall time")
    print()
    print(f"{'method':<24}{'mean µs':>10}{'median µs':>11}{'p95 µs':>9}{'share':>8}")
    for m in methods:
        times = per_method[m]
        pq = statistics.quantiles(times, n=100) if n >= 2 else [times[0]] * 99
        print(
            f"{m:<24}{statistics.fmean(times) / 1e3:>10.1f}{statistics.median(times) / 1e3:>11.1f}"
            f"{pq[94] / 1e3:>9.1f}{100.0 * sum(times) / total_ns:>7.1f}%"
        )
    print(
        f"{'full set per sample':<24}{mean_ms * 1e3:>10.1f}{statistics.median(per_sample) / 1e3:>11.1f}"
        f"{q[94] / 1e3:>9.1f}{100.0:>7.1f}%"
    )
    index_ms = sum(statistics.fmean(per_method[m]) for m in methods if m in INDEX_SET) / 1e6
    verdict = "within" if index_ms < TARGET_MS else "OVER"
    print()
    print(
        f"time per sample, the index set ({', '.join(INDEX_SET)}): {index_ms:.3f} ms (mean), "
        f"target {TARGET_MS} ms: {verdict} target"
    )
    print(f"time per sample, every method above: {mean_ms:.3f} ms (mean)")
    return 1 if args.check and index_ms >= TARGET_MS else 0


if __name__ == "__main__":
    raise SystemExit(main())
