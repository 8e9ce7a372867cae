"""Fit the demo models: a lending champion and challenger, and a motor claim-frequency model.

* Champion: a scaled logistic regression on one-hot categoricals, without the leak and
  without the group attribute. It cannot see the interaction or the U-shape.
* Challenger: gradient-boosted trees with native categorical splits, trained WITH the leak
  (``collections_contacts_6m``), so that the checks have a leak to find.
* Motor: gradient-boosted trees with a Poisson loss on claims per year, weighted by exposure.

All three are single scikit-learn Pipelines taking the raw columns named in the constants
below; any other columns of the frame are ignored.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
from sklearn.compose import ColumnTransformer
from sklearn.ensemble import HistGradientBoostingClassifier, HistGradientBoostingRegressor
from sklearn.impute import SimpleImputer
from sklearn.linear_model import LogisticRegression
from sklearn.pipeline import Pipeline
from sklearn.preprocessing import OneHotEncoder, OrdinalEncoder, StandardScaler

from demo_models.lending import (
    LENDING_CATEGORICAL,
    LENDING_LEAK,
    LENDING_NUMERIC,
    LENDING_TARGET,
    LENDING_TRUTH,
)
from demo_models.motor import MOTOR_CATEGORICAL, MOTOR_EXPOSURE, MOTOR_NUMERIC, MOTOR_TARGET

LENDING_CHAMPION_FEATURES: tuple[str, ...] = LENDING_NUMERIC + LENDING_CATEGORICAL
LENDING_CHALLENGER_FEATURES: tuple[str, ...] = (
    LENDING_CATEGORICAL + LENDING_NUMERIC + (LENDING_LEAK,)
)
MOTOR_FEATURES: tuple[str, ...] = MOTOR_CATEGORICAL + MOTOR_NUMERIC


def _ordinal_then_passthrough(categorical: tuple[str, ...], numeric: tuple[str, ...]):
    """Categoricals first (as codes 0..k-1, unseen -> NaN, which the trees treat as missing)."""
    encoder = OrdinalEncoder(
        handle_unknown="use_encoded_value",
        unknown_value=np.nan,
        encoded_missing_value=np.nan,
        dtype=np.float64,
    )
    transformer = ColumnTransformer(
        [("categorical", encoder, list(categorical)), ("numeric", "passthrough", list(numeric))],
        verbose_feature_names_out=False,
    )
    mask = [True] * len(categorical) + [False] * len(numeric)
    return transformer, mask


def build_lending_champion(reference: pd.DataFrame, seed: int = 0) -> Pipeline:
    """Logistic regression on imputed, scaled numerics and one-hot categoricals."""
    numeric = Pipeline([("impute", SimpleImputer(strategy="median")), ("scale", StandardScaler())])
    prepare = ColumnTransformer(
        [
            ("numeric", numeric, list(LENDING_NUMERIC)),
            (
                "categorical",
                OneHotEncoder(handle_unknown="ignore", sparse_output=False),
                list(LENDING_CATEGORICAL),
            ),
        ],
        verbose_feature_names_out=False,
    )
    model = Pipeline(
        [("prepare", prepare), ("logit", LogisticRegression(max_iter=2_000, random_state=seed))]
    )
    features = list(LENDING_CHAMPION_FEATURES)
    return model.fit(reference[features], reference[LENDING_TARGET])


def build_lending_challenger(reference: pd.DataFrame, seed: int = 0) -> Pipeline:
    """Gradient-boosted trees with native categoricals, trained with the leak feature.

    Like a challenger a bank would build, it is constrained to the business's declared
    directions (LENDING_TRUTH["monotone"]) for every numeric feature but age, whose U-shape is
    the planted non-monotone effect; the leak is left unconstrained too.
    """
    prepare, mask = _ordinal_then_passthrough(
        LENDING_CATEGORICAL, LENDING_NUMERIC + (LENDING_LEAK,)
    )
    sign = {"increasing": 1, "decreasing": -1}
    declared = LENDING_TRUTH["monotone"]
    constraints = [0] * len(LENDING_CATEGORICAL) + [
        sign.get(declared.get(f, ""), 0) if f not in (LENDING_LEAK, "age_years") else 0
        for f in LENDING_NUMERIC + (LENDING_LEAK,)
    ]
    trees = HistGradientBoostingClassifier(
        max_iter=250,
        learning_rate=0.05,
        max_leaf_nodes=15,
        min_samples_leaf=40,
        l2_regularization=1.0,
        categorical_features=mask,
        monotonic_cst=constraints,
        early_stopping=False,
        random_state=seed,
    )
    model = Pipeline([("prepare", prepare), ("hgb", trees)])
    features = list(LENDING_CHALLENGER_FEATURES)
    return model.fit(reference[features], reference[LENDING_TARGET])


def build_motor_frequency(policies: pd.DataFrame, seed: int = 0) -> Pipeline:
    """Poisson gradient-boosted trees on claims per year, weighted by exposure.

    Exposure is the weight, not an input: predictions are expected claims per year of cover.
    """
    prepare, mask = _ordinal_then_passthrough(MOTOR_CATEGORICAL, MOTOR_NUMERIC)
    trees = HistGradientBoostingRegressor(
        loss="poisson",
        max_iter=200,
        learning_rate=0.05,
        max_leaf_nodes=15,
        min_samples_leaf=100,
        l2_regularization=1.0,
        categorical_features=mask,
        early_stopping=False,
        random_state=seed,
    )
    model = Pipeline([("prepare", prepare), ("hgb", trees)])
    exposure = policies[MOTOR_EXPOSURE].to_numpy(dtype=float)
    frequency = policies[MOTOR_TARGET].to_numpy(dtype=float) / exposure
    return model.fit(policies[list(MOTOR_FEATURES)], frequency, hgb__sample_weight=exposure)
