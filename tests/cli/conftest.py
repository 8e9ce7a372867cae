"""Small models and data files for the command-line tests, built once per session."""

import subprocess
import sys

import numpy as np
import pandas as pd
import pytest
import skops.io as sio
from sklearn.compose import ColumnTransformer
from sklearn.linear_model import LogisticRegression
from sklearn.pipeline import make_pipeline
from sklearn.preprocessing import OneHotEncoder, StandardScaler


def small_frame(n=400, seed=0):
    rng = np.random.default_rng(seed)
    df = pd.DataFrame({
        "income": rng.normal(40_000, 9_000, n).round(0),
        "debt_ratio": rng.uniform(0, 0.8, n).round(3),
        "region": rng.choice(["north", "south", "west"], n),
    })
    logit = -2 + 4 * df["debt_ratio"] - (df["income"] - 40_000) / 20_000 + (df["region"] == "west") * 0.7
    df["bad"] = (rng.uniform(size=n) < 1 / (1 + np.exp(-logit))).astype(int)
    df["ref"] = [f"r{i}" for i in range(n)]
    return df


@pytest.fixture(scope="session")
def cli_files(tmp_path_factory):
    d = tmp_path_factory.mktemp("cli")
    df = small_frame()
    ct = ColumnTransformer([
        ("num", StandardScaler(), ["income", "debt_ratio"]),
        ("cat", OneHotEncoder(handle_unknown="error"), ["region"]),
    ])
    model = make_pipeline(ct, LogisticRegression(max_iter=1000)).fit(df[["income", "debt_ratio", "region"]], df["bad"])
    sio.dump(model, d / "model.skops")
    df.to_csv(d / "data.csv", index=False)
    df.to_parquet(d / "data.parquet")
    return {"dir": d, "model": d / "model.skops", "csv": d / "data.csv", "parquet": d / "data.parquet",
            "frame": df, "estimator": model}


def run_cli(*args, cwd=None):
    """Run ``python -m workbench ARGS``; returns (exit code, stdout, stderr)."""
    proc = subprocess.run([sys.executable, "-m", "workbench", *map(str, args)], capture_output=True,
                          text=True, cwd=cwd, timeout=300)
    return proc.returncode, proc.stdout, proc.stderr
