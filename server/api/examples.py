"""One example request per method, shown in the OpenAPI schema (and checked by a test to compute).

The readings are invented for illustration; the published check values live in the tests.
"""

from __future__ import annotations

from typing import Any

_DET = {"container": "T-17", "tare_g": 15.20, "wet_tare_g": 45.62, "dry_tare_g": 38.11}
_SIEVE = {
    "dry_mass_g": 1012.6,
    "sieves": [
        {"size_mm": 37.5, "retained_g": 0.0},
        {"size_mm": 19.0, "retained_g": 84.1},
        {"size_mm": 4.75, "retained_g": 201.7},
        {"size_mm": 2.0, "retained_g": 150.2},
        {"size_mm": 0.425, "retained_g": 240.9},
        {"size_mm": 0.075, "retained_g": 221.5},
    ],
    "pan_g": 6.2,
}
_HYDROMETER = {
    "dry_mass_g": 50.0,
    "specific_gravity": 2.70,
    "hydrometer": {"type": "152H", "id": "H-04"},
    "meniscus_correction": 1.0,
    "zero_readings": [{"temperature_c": 18.0, "reading": 6.5}, {"temperature_c": 24.0, "reading": 5.5}],
    "readings": [
        {"minutes": 1, "reading": 46.0, "temperature_c": 21.0},
        {"minutes": 2, "reading": 42.5, "temperature_c": 21.0},
        {"minutes": 15, "reading": 34.0, "temperature_c": 21.0},
        {"minutes": 60, "reading": 27.0, "temperature_c": 21.0},
        {"minutes": 250, "reading": 21.0, "temperature_c": 21.0},
        {"minutes": 1440, "reading": 15.0, "temperature_c": 20.5},
    ],
}
_UCS = {
    "diameter_mm": 38.0,
    "height_mm": 76.0,
    "readings": [
        {"deformation_mm": 0.0, "load_n": 0.0},
        {"deformation_mm": 0.76, "load_n": 61.0},
        {"deformation_mm": 1.52, "load_n": 98.0},
        {"deformation_mm": 2.28, "load_n": 112.0},
        {"deformation_mm": 3.04, "load_n": 109.0},
    ],
}

EXAMPLES: dict[str, dict[str, Any]] = {
    "water-content": {"determinations": [_DET, {**_DET, "container": "T-18", "wet_tare_g": 44.95}]},
    "ll-cup-multipoint": {
        "trials": [
            {"blows": 33, **_DET, "wet_tare_g": 44.10, "dry_tare_g": 36.80},
            {"blows": 26, **_DET, "wet_tare_g": 44.60, "dry_tare_g": 37.05},
            {"blows": 18, **_DET, "wet_tare_g": 45.20, "dry_tare_g": 37.30},
        ]
    },
    "ll-cup-one-point": {"trials": [{"blows": 23, **_DET, "wet_tare_g": 44.60, "dry_tare_g": 37.05}]},
    "ll-cone": {
        "cone": "80g-30deg",
        "trials": [
            {"penetration_mm": [16.2, 16.4], **_DET, "wet_tare_g": 44.10, "dry_tare_g": 36.80},
            {"penetration_mm": [19.1, 19.3], **_DET, "wet_tare_g": 44.60, "dry_tare_g": 37.05},
            {"penetration_mm": [22.0, 22.3], **_DET, "wet_tare_g": 45.20, "dry_tare_g": 37.30},
            {"penetration_mm": [24.1, 24.4], **_DET, "wet_tare_g": 45.60, "dry_tare_g": 37.45},
        ],
    },
    "plastic-limit": {
        "determinations": [
            {**_DET, "wet_tare_g": 25.60, "dry_tare_g": 23.80},
            {**_DET, "wet_tare_g": 25.80, "dry_tare_g": 23.96},
        ]
    },
    "atterberg": {
        "water_content": {"determinations": [_DET]},
        "liquid_limit": {
            "method": "ll-cup-multipoint",
            "trials": [
                {"blows": 33, **_DET, "wet_tare_g": 44.10, "dry_tare_g": 36.80},
                {"blows": 26, **_DET, "wet_tare_g": 44.60, "dry_tare_g": 37.05},
                {"blows": 18, **_DET, "wet_tare_g": 45.20, "dry_tare_g": 37.30},
            ],
        },
        "plastic_limit": {
            "determinations": [
                {**_DET, "wet_tare_g": 25.60, "dry_tare_g": 23.80},
                {**_DET, "wet_tare_g": 25.80, "dry_tare_g": 23.96},
            ]
        },
        "clay_fraction": 31.0,
        "fines": 86.0,
        "sand": 12.0,
        "gravel": 2.0,
    },
    "sieve": _SIEVE,
    "hydrometer": {
        **_HYDROMETER,
        "separation_sieve_mm": 2.0,
        "separation_passing_pct": 96.4,
        "passing_75um_pct": 71.8,
    },
    "grading": {"sieve": _SIEVE, "hydrometer": _HYDROMETER},
    "vane": {
        "diameter_mm": 12.7,
        "height_mm": 12.7,
        "undisturbed": {"torque_nm": 0.0142},
        "remoulded": {"torque_nm": 0.0035},
    },
    "fall-cone-strength": {
        "cone_mass_g": 80.0,
        "cone_angle_deg": 30,
        "cone_factor": 0.8,
        "undisturbed": {"penetration_mm": [6.1, 6.3]},
        "remoulded": {"penetration_mm": [14.2, 14.0]},
    },
    "unconfined-compression": {"undisturbed": _UCS},
    "classification": {
        "liquid_limit": 41.0,
        "plastic_limit": 22.0,
        "fines": 86.0,
        "sand": 12.0,
        "gravel": 2.0,
    },
    "particle-density": {
        "determinations": [
            {
                "pycnometer_g": 30.12,
                "pycnometer_soil_g": 40.15,
                "pycnometer_soil_water_g": 86.45,
                "pycnometer_water_g": 80.17,
                "temperature_c": 21.0,
            },
            {
                "pycnometer_g": 29.80,
                "pycnometer_soil_g": 39.92,
                "pycnometer_soil_water_g": 86.19,
                "pycnometer_water_g": 79.85,
                "temperature_c": 21.5,
            },
        ]
    },
    "linear-shrinkage": {"mould_length_mm": 140.0, "oven_dry_length_mm": 128.6, "condition": "intact"},
    "density": {
        "specimens": [
            {"mass_g": 161.20, "diameter_mm": 38.1, "height_mm": 76.2},
            {"mass_g": 160.85, "diameter_mm": 38.0, "height_mm": 76.4},
        ],
        "water_content": {"determinations": [_DET]},
        "particle_density_mg_m3": 2.70,
    },
    "loss-on-ignition": {
        "determinations": [
            {"crucible_g": 21.402, "crucible_dry_g": 31.455, "crucible_ignited_g": 30.871},
            {"crucible_g": 20.918, "crucible_dry_g": 30.977, "crucible_ignited_g": 30.391},
        ],
        "furnace_c": 440,
    },
    "compaction": {
        "effort": "standard",
        "mould_volume_cm3": 944.0,
        "mould_g": 4250.0,
        "particle_density_mg_m3": 2.70,
        "points": [
            {"mould_soil_g": m, "determinations": [{"tare_g": 15.00, "wet_tare_g": 115.00, "dry_tare_g": d}]}
            for m, d in (
                (6010.0, 104.30),
                (6190.0, 101.40),
                (6120.0, 102.90),
                (6160.0, 100.00),
                (6090.0, 98.60),
            )
        ],
    },
}
