"""An invented motor-insurance book for claim frequency, with a known true structure.

Every number here is made up. Each row is one policy with its time on risk, ``exposure_years``
in (0, 1], and the number of claims in that time, ``claim_count`` ~ Poisson(exposure * rate),
where the log of the yearly claim rate is a sum of the terms below (base rate 0.09 per year):

* **Non-monotone effect** ``driver_age``: high for young drivers, ``1.0 * exp(-(age - 18) / 7)``,
  lowest around 55-60, rising again after 60 by ``0.0006 * (age - 60)**2``.
* **Interaction pair** ``driver_age`` x ``vehicle_power_kw``: the power effect is
  ``0.25 * log(power / 85)`` for everyone plus ``0.6 * log(power / 85)`` more under 25.
* ``bonus_malus`` (+0.9 per unit log of bonus_malus / 100): the claims-history coefficient,
  50 (best) to 230; young drivers start near 100. It is associated with ``driver_age``.
* ``urban_density`` (+0.12 per unit log), ``annual_mileage_km`` (+0.3 per unit log),
  ``vehicle_age_years`` (-0.015 per year).
* Categorical shifts for ``fuel``, ``parking`` and ``region``; region also sets the density.

Exposure is the time on risk, not a model input: the frequency model is fitted on
``claim_count / exposure_years`` with ``exposure_years`` as the sample weight.
"""

from __future__ import annotations

import numpy as np
import pandas as pd

MOTOR_TARGET = "claim_count"
MOTOR_EXPOSURE = "exposure_years"
MOTOR_ID = "policy_id"

MOTOR_NUMERIC = (
    "driver_age",
    "vehicle_power_kw",
    "vehicle_age_years",
    "bonus_malus",
    "urban_density",
    "annual_mileage_km",
)
MOTOR_CATEGORICAL = ("region", "fuel", "parking")

_BASE_RATE = 0.09
# region -> (log-rate shift, median inhabitants per km2)
_REGIONS = {
    "coastal": (0.05, 300.0),
    "mountain": (-0.15, 60.0),
    "plains": (-0.05, 120.0),
    "metro north": (0.15, 3_000.0),
    "metro south": (0.10, 2_500.0),
    "river valley": (0.0, 250.0),
}
_FUEL_SHIFT = {"petrol": 0.0, "diesel": 0.10, "hybrid": -0.05, "electric": 0.05}
_PARKING_SHIFT = {"garage": -0.10, "driveway": 0.0, "street": 0.12}

MOTOR_TRUTH: dict = {
    "target": MOTOR_TARGET,
    "exposure": MOTOR_EXPOSURE,
    "base_rate_per_year": _BASE_RATE,
    "non_monotone": {"feature": "driver_age", "shape": "high young, lowest near 55-60"},
    "interaction_pair": ("driver_age", "vehicle_power_kw"),
    "associated_pair": ("driver_age", "bonus_malus"),
    "monotone": {
        "driver_age": "not monotone",
        "vehicle_power_kw": "increasing",
        "vehicle_age_years": "decreasing",
        "bonus_malus": "increasing",
        "urban_density": "increasing",
        "annual_mileage_km": "increasing",
    },
    "output_units": "claims per year",
}

MOTOR_DISPLAY: dict[str, tuple[str, str]] = {
    "driver_age": ("Age of main driver", "years"),
    "vehicle_power_kw": ("Engine power", "kW"),
    "vehicle_age_years": ("Vehicle age", "years"),
    "bonus_malus": ("Bonus-malus coefficient", "50 best to 230 worst"),
    "urban_density": ("Population density at home address", "inhabitants per km2"),
    "annual_mileage_km": ("Declared annual mileage", "km per year"),
    "region": ("Region", ""),
    "fuel": ("Fuel", ""),
    "parking": ("Overnight parking", ""),
    MOTOR_EXPOSURE: ("Time on risk", "years"),
    MOTOR_TARGET: ("Number of claims", "count"),
}


def _pick(rng: np.random.Generator, labels: list[str], probs, size: int) -> np.ndarray:
    return np.asarray(labels, dtype=object)[rng.choice(len(labels), size=size, p=probs)]


def generate_motor(seed: int = 11, n: int = 20_000) -> pd.DataFrame:
    """Draw ``n`` invented motor policies; the same arguments always give an identical frame."""
    rng = np.random.default_rng(seed)
    age = np.clip(np.rint(rng.normal(46.0, 15.0, n)), 18, 90)
    power = np.clip(np.rint(np.exp(rng.normal(np.log(85.0), 0.35, n))), 40, 300)
    vehicle_age = np.clip(np.rint(rng.gamma(2.0, 3.5, n)), 0, 25)
    # Drivers start at 100 and earn bonus with claim-free years; some carry a malus.
    bonus = np.clip(
        np.rint(np.maximum(50.0, 100.0 - 2.2 * (age - 18.0)) + rng.gamma(1.2, 12.0, n) - 8.0),
        50,
        230,
    )
    region = _pick(rng, list(_REGIONS), [0.2, 0.1, 0.2, 0.15, 0.15, 0.2], n)
    median_density = np.array([_REGIONS[r][1] for r in region])
    density = np.clip(np.rint(median_density * np.exp(rng.normal(0.0, 1.0, n))), 5, 27_000)
    mileage = np.clip(np.round(np.exp(rng.normal(np.log(12_000.0), 0.45, n)), -2), 1_000, 80_000)
    fuel = _pick(rng, list(_FUEL_SHIFT), [0.50, 0.30, 0.13, 0.07], n)
    parking = _pick(rng, list(_PARKING_SHIFT), [0.30, 0.35, 0.35], n)
    exposure = np.where(rng.random(n) < 0.6, 1.0, np.round(rng.uniform(0.04, 1.0, n), 3))

    log_power = np.log(power / 85.0)
    log_rate = (
        np.log(_BASE_RATE)
        + 1.0 * np.exp(-(age - 18.0) / 7.0)
        + 0.0006 * np.maximum(age - 60.0, 0.0) ** 2
        + 0.25 * log_power
        + 0.6 * log_power * (age < 25)
        - 0.015 * vehicle_age
        + 0.9 * np.log(bonus / 100.0)
        + 0.12 * np.log(density / 400.0)
        + 0.3 * np.log(mileage / 12_000.0)
        + np.array([_REGIONS[r][0] for r in region])
        + np.array([_FUEL_SHIFT[f] for f in fuel])
        + np.array([_PARKING_SHIFT[p] for p in parking])
    )
    claims = rng.poisson(exposure * np.exp(log_rate))

    frame = pd.DataFrame(
        {
            MOTOR_ID: [f"P{i:06d}" for i in range(1, n + 1)],
            MOTOR_EXPOSURE: exposure,
            "driver_age": age.astype(np.int64),
            "vehicle_power_kw": power.astype(np.int64),
            "vehicle_age_years": vehicle_age.astype(np.int64),
            "bonus_malus": bonus.astype(np.int64),
            "urban_density": density.astype(np.int64),
            "annual_mileage_km": mileage,
            "region": region,
            "fuel": fuel,
            "parking": parking,
            MOTOR_TARGET: claims.astype(np.int64),
        }
    )
    for column in (MOTOR_ID, *MOTOR_CATEGORICAL):
        frame[column] = frame[column].astype("str")
    return frame
