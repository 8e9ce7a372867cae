"""An invented regional lender's consumer instalment loans, with a known true structure.

Every number here is made up. The scenario exists so that each level of workbench has something
real to find, and so that tests can check that it is found. Explanations of a model fitted to
these data describe the model, not the world, and not any real lender or applicant.

Two periods of applications are drawn: a *reference* period (2024-01 to 2024-12), on which the
models are fitted, and a *current* period (2025-01 to 2025-06), which has drifted. Each row is one
application with its outcome, ``defaulted_12m`` (1 = 90+ days in arrears within 12 months).

True structure (the log-odds of default is a sum of the terms below plus Bernoulli noise):

* **Interaction pair** ``debt_to_income`` x ``employment_type``: the slope of the log-odds in
  debt-to-income is 1.0 for permanent staff, 3.0 part-time, 6.0 fixed-term and 10.0 for the
  self-employed (per unit of the fraction, centred at 0.30).
* **Non-monotone effect** ``age_years``: a U-shape, ``0.0025 * (age - 45)**2``; lowest risk at 45.
* **Associated pair** ``annual_income`` and ``loan_amount``: the loan is about 22 % of income
  with a small log-normal spread, so |Spearman| is about 0.85. Risk falls with income
  (-0.9 per unit log income) and rises with the amount borrowed (+0.7 per unit log amount).
* **Leak** ``collections_contacts_6m``: collections calls in the six months *after* the loan
  started, so it is recorded after the outcome. Defaulters get Poisson(3.5) contacts, others
  Poisson(0.15). Only the challenger model was trained with it.
* **Drift** between the periods in ``debt_to_income`` (Beta(2.2, 5.5), mean 0.29 -> Beta(3.2,
  4.8), mean 0.40) and ``credit_enquiries_6m`` (Poisson(0.9) -> Poisson(1.6)). Both raise risk,
  so the score drifts too. PSI on reference deciles is about 0.3 and 0.2 for these two features,
  about 0.15 for the champion's score, and near 0 for the other features, which are drawn from
  the same distributions in both periods. (The challenger's score moves less, PSI about 0.03,
  because the leak dominates it.) The default rate rises from about 10 % to about 13 %.
* **Group attribute** ``applicant_group`` ("A" 65 %, "B" 35 %): not a model input and no direct
  effect on the outcome, but group B has about 12 % lower income on average, so a model can
  treat the groups differently through income. It is there for segment and adverse impact
  ratios, which are screening indicators, not legal findings.
* **No effect** ``region``: drawn but unused by the outcome, so its importance should be near 0.
* Other monotone effects: ``term_months`` (+), ``credit_history_months`` (-, to 30 years),
  ``revolving_utilisation`` (+), ``credit_enquiries_6m`` (+), ``late_payments_24m`` (+),
  ``months_at_address`` (-); categorical shifts for home status, loan purpose and channel.
* **Missing values**: ``revolving_utilisation`` (about 4 %, applicants with no revolving lines;
  no effect on risk when missing) and ``months_at_address`` (about 3 %, not recorded).
"""

from __future__ import annotations

import numpy as np
import pandas as pd

LENDING_TARGET = "defaulted_12m"
LENDING_ID = "application_id"
LENDING_MONTH = "application_month"
LENDING_GROUP = "applicant_group"
LENDING_LEAK = "collections_contacts_6m"

LENDING_NUMERIC = (
    "age_years",
    "annual_income",
    "loan_amount",
    "debt_to_income",
    "term_months",
    "credit_history_months",
    "revolving_utilisation",
    "credit_enquiries_6m",
    "late_payments_24m",
    "months_at_address",
)
LENDING_CATEGORICAL = (
    "employment_type",
    "home_status",
    "loan_purpose",
    "region",
    "channel",
)

# Log-odds slope in debt_to_income per employment type: the planted interaction.
_DTI_SLOPE = {"permanent": 1.0, "part-time": 3.0, "fixed-term": 6.0, "self-employed": 10.0}
_EMPLOYMENT_SHIFT = {"permanent": 0.0, "part-time": 0.25, "fixed-term": 0.35, "self-employed": 0.2}
_HOME_SHIFT = {"owner": -0.25, "mortgage": -0.15, "renting": 0.15, "with family": 0.0}
_PURPOSE_SHIFT = {
    "car": -0.1,
    "home improvement": -0.15,
    "debt consolidation": 0.3,
    "education": 0.1,
    "other": 0.15,
}
_CHANNEL_SHIFT = {"branch": 0.0, "online": 0.15, "broker": 0.35}
_EMPLOYMENT = ["permanent", "fixed-term", "self-employed", "part-time"]
_INTERCEPT = -3.6

# What changes between the periods; everything else is drawn identically.
_PERIODS = {
    "reference": {
        "months": pd.period_range("2024-01", "2024-12", freq="M"),
        "id_prefix": "L24-",
        "dti_beta": (2.2, 5.5),
        "enquiry_mean": 0.9,
    },
    "current": {
        "months": pd.period_range("2025-01", "2025-06", freq="M"),
        "id_prefix": "L25-",
        "dti_beta": (3.0, 5.0),
        "enquiry_mean": 1.4,
    },
}

LENDING_TRUTH: dict = {
    "target": LENDING_TARGET,
    "default_rate_range": (0.08, 0.15),
    "interaction_pair": ("debt_to_income", "employment_type"),
    "interaction_slopes": dict(_DTI_SLOPE),
    "non_monotone": {"feature": "age_years", "shape": "U", "lowest_risk_at": 45.0},
    "associated_pair": ("annual_income", "loan_amount"),
    "leak": LENDING_LEAK,
    "drifted": ("debt_to_income", "credit_enquiries_6m"),
    "undrifted": tuple(
        f
        for f in LENDING_NUMERIC + LENDING_CATEGORICAL
        if f not in ("debt_to_income", "credit_enquiries_6m")
    ),
    "group": LENDING_GROUP,
    "group_proxy": "annual_income",
    "no_effect": ("region",),
    "missing": ("revolving_utilisation", "months_at_address"),
    "monotone": {
        "age_years": "not monotone",
        "annual_income": "decreasing",
        "loan_amount": "increasing",
        "debt_to_income": "increasing",
        "term_months": "increasing",
        "credit_history_months": "decreasing",
        "revolving_utilisation": "increasing",
        "credit_enquiries_6m": "increasing",
        "late_payments_24m": "increasing",
        "months_at_address": "decreasing",
        LENDING_LEAK: "increasing",
    },
    "periods": {"reference": ("2024-01", "2024-12"), "current": ("2025-01", "2025-06")},
}

LENDING_DISPLAY: dict[str, tuple[str, str]] = {
    "age_years": ("Age of applicant", "years"),
    "annual_income": ("Annual income", "currency per year"),
    "loan_amount": ("Loan amount", "currency"),
    "debt_to_income": ("Debt-to-income ratio", "fraction of gross income"),
    "term_months": ("Loan term", "months"),
    "credit_history_months": ("Length of credit history", "months"),
    "revolving_utilisation": ("Revolving credit utilisation", "fraction of limits"),
    "credit_enquiries_6m": ("Credit enquiries in the last 6 months", "count"),
    "late_payments_24m": ("Late payments in the last 24 months", "count"),
    "months_at_address": ("Time at current address", "months"),
    "employment_type": ("Employment type", ""),
    "home_status": ("Home status", ""),
    "loan_purpose": ("Purpose of the loan", ""),
    "region": ("Region", ""),
    "channel": ("Application channel", ""),
    LENDING_LEAK: ("Collections contacts in the 6 months after the loan started", "count"),
    LENDING_GROUP: ("Applicant group", ""),
}


def _pick(rng: np.random.Generator, labels: list[str], probs, size: int) -> np.ndarray:
    return np.asarray(labels, dtype=object)[rng.choice(len(labels), size=size, p=probs)]


def _shift(values: np.ndarray, table: dict[str, float]) -> np.ndarray:
    return np.array([table[v] for v in values], dtype=float)


def _draw_period(rng: np.random.Generator, n: int, period: str) -> pd.DataFrame:
    spec = _PERIODS[period]
    group = _pick(rng, ["A", "B"], [0.65, 0.35], n)
    age = np.clip(np.rint(rng.normal(42.0, 12.0, n)), 21, 75)

    # Group B holds fewer permanent jobs: the route by which a model can treat groups apart.
    employment = np.where(
        group == "A",
        _pick(rng, _EMPLOYMENT, [0.64, 0.13, 0.13, 0.10], n),
        _pick(rng, _EMPLOYMENT, [0.48, 0.20, 0.12, 0.20], n),
    )
    employment_income = {
        "permanent": 0.1,
        "fixed-term": -0.1,
        "self-employed": 0.15,
        "part-time": -0.45,
    }
    log_income = (
        np.log(38_000.0)
        + 0.012 * (np.minimum(age, 55.0) - 40.0)
        + _shift(employment, employment_income)
        - 0.12 * (group == "B")
        + rng.normal(0.0, 0.38, n)
    )
    income = np.clip(np.round(np.exp(log_income), -2), 9_000, 400_000)
    # The amount borrowed follows income closely: the planted associated pair.
    loan = np.clip(
        np.round(income * 0.22 * np.exp(rng.normal(0.0, 0.22, n)) / 250) * 250, 1_000, 60_000
    )
    term = rng.choice([12, 24, 36, 48, 60], size=n, p=[0.10, 0.20, 0.30, 0.20, 0.20])

    a, b = spec["dti_beta"]
    dti = np.round(np.clip(rng.beta(a, b, n), 0.0, 0.95), 3)
    history = np.rint((age - 18.0) * 12.0 * rng.beta(2.0, 2.0, n))
    utilisation = np.round(np.clip(rng.beta(1.6, 3.2, n), 0.0, 1.0), 3)
    enquiries = rng.poisson(spec["enquiry_mean"], n)
    late = rng.poisson(0.2 + 0.5 * utilisation, n)
    at_address = np.clip(np.rint(rng.exponential(60.0, n)) + 1, 1, 480).astype(float)

    home = np.where(
        rng.random(n) < np.clip((age - 21.0) / 60.0, 0.0, 1.0),
        _pick(rng, ["owner", "mortgage"], [0.45, 0.55], n),
        _pick(rng, ["renting", "with family", "mortgage"], [0.60, 0.25, 0.15], n),
    )
    purpose = _pick(
        rng,
        list(_PURPOSE_SHIFT),
        [0.30, 0.20, 0.30, 0.08, 0.12],
        n,
    )
    region = _pick(
        rng, ["north", "south", "east", "west", "capital"], [0.22, 0.2, 0.18, 0.15, 0.25], n
    )
    channel = _pick(rng, list(_CHANNEL_SHIFT), [0.45, 0.35, 0.20], n)

    util_missing = rng.random(n) < 0.04
    address_missing = rng.random(n) < 0.03

    log_odds = (
        _INTERCEPT
        + np.array([_DTI_SLOPE[e] for e in employment]) * (dti - 0.30)
        + _shift(employment, _EMPLOYMENT_SHIFT)
        + 0.0025 * (age - 45.0) ** 2
        - 0.9 * np.log(income / 40_000.0)
        + 0.7 * np.log(loan / 9_000.0)
        + 0.012 * (term - 36)
        - 0.0035 * (np.minimum(history, 360.0) - 120.0)
        + np.where(util_missing, 0.0, 1.3 * (utilisation - 0.35))
        + 0.22 * enquiries
        + 0.45 * late
        + np.where(address_missing, 0.0, -0.002 * (np.minimum(at_address, 240.0) - 60.0))
        + _shift(home, _HOME_SHIFT)
        + _shift(purpose, _PURPOSE_SHIFT)
        + _shift(channel, _CHANNEL_SHIFT)
    )
    defaulted = (rng.random(n) < 1.0 / (1.0 + np.exp(-log_odds))).astype(np.int64)
    # Recorded after the outcome: this is the leak.
    contacts = rng.poisson(np.where(defaulted == 1, 3.5, 0.15))

    months = spec["months"][np.sort(rng.integers(0, len(spec["months"]), n))]
    frame = pd.DataFrame(
        {
            LENDING_ID: [f"{spec['id_prefix']}{i:06d}" for i in range(1, n + 1)],
            LENDING_MONTH: months.strftime("%Y-%m"),
            "age_years": age.astype(np.int64),
            "annual_income": income,
            "loan_amount": loan,
            "debt_to_income": dti,
            "term_months": term.astype(np.int64),
            "credit_history_months": history.astype(np.int64),
            "revolving_utilisation": np.where(util_missing, np.nan, utilisation),
            "credit_enquiries_6m": enquiries.astype(np.int64),
            "late_payments_24m": late.astype(np.int64),
            "months_at_address": np.where(address_missing, np.nan, at_address),
            "employment_type": employment,
            "home_status": home,
            "loan_purpose": purpose,
            "region": region,
            "channel": channel,
            LENDING_LEAK: contacts.astype(np.int64),
            LENDING_GROUP: group,
            LENDING_TARGET: defaulted,
        }
    )
    for column in (*LENDING_CATEGORICAL, LENDING_GROUP, LENDING_ID, LENDING_MONTH):
        frame[column] = frame[column].astype("str")
    return frame


def generate_lending(
    seed: int = 7, n_reference: int = 20_000, n_current: int = 20_000
) -> tuple[pd.DataFrame, pd.DataFrame]:
    """Draw the reference and the current period of the invented lending book.

    The two periods come from independent child seeds of ``seed``, so the reference frame does
    not depend on ``n_current``. The same arguments always give identical frames.
    """
    reference_seed, current_seed = np.random.SeedSequence(seed).spawn(2)
    reference = _draw_period(np.random.default_rng(reference_seed), n_reference, "reference")
    current = _draw_period(np.random.default_rng(current_seed), n_current, "current")
    return reference, current
