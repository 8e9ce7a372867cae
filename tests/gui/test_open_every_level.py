"""Every level on files opened the way ``workbench open`` opens them: a scikit-learn bundled
dataset (breast cancer, a tree classifier) and the motor demo (a claim-frequency model with
exposure). Assertions are on what the widgets show."""

import numpy as np
import pandas as pd
import pyqtgraph as pg
import pytest
import skops.io as sio
from sklearn import metrics as skm
from sklearn.datasets import load_breast_cancer
from sklearn.ensemble import HistGradientBoostingClassifier

from workbench.ui.app import open_files

LEVELS = ["Portfolio", "Case", "Effect", "Ranking", "Pairs", "Versions", "Checks", "Dossier"]
MOTOR_ROWS = 400


@pytest.fixture(scope="module")
def cancer_files(tmp_path_factory):
    """load_breast_cancer as a frame, the outcome as ``malignant`` (1 = malignant), a
    HistGradientBoostingClassifier saved with skops, the data as CSV."""
    folder = tmp_path_factory.mktemp("cancer")
    bunch = load_breast_cancer(as_frame=True)
    frame = bunch.data.copy()
    frame["malignant"] = 1 - bunch.target  # sklearn codes malignant as 0
    model = HistGradientBoostingClassifier(max_iter=60, random_state=0)
    model.fit(frame[bunch.feature_names], frame["malignant"])
    sio.dump(model, folder / "cancer.skops")
    frame.to_csv(folder / "cancer.csv", index=False)
    return {"model": folder / "cancer.skops", "data": folder / "cancer.csv",
            "features": list(bunch.feature_names), "rows": len(frame)}


@pytest.fixture(scope="module")
def motor_files(tmp_path_factory, demo_paths):
    """The motor demo's frequency model with the first rows of its policies."""
    folder = tmp_path_factory.mktemp("motor")
    policies = pd.read_parquet(demo_paths["motor_policies"]).head(MOTOR_ROWS)
    policies.to_parquet(folder / "policies.parquet", index=False)
    return {"model": demo_paths["motor_frequency"], "data": folder / "policies.parquet",
            "frame": policies}


def _visit(window, name):
    window.show_level(name)
    assert window.ctx.runner.wait_idle(300)
    assert window.current_level().name == name
    return window.levels[name]


def _bars(titled) -> list:
    return [i for i in titled.plot.items if isinstance(i, pg.BarGraphItem)]


def _left_ticks(titled) -> list[str]:
    ticks = titled.plot.getAxis("left")._tickLevels
    return [text for _pos, text in ticks[0]] if ticks else []


def test_bundled_dataset_every_level(window, cancer_files, tmp_path):
    open_files(window, model=cancer_files["model"], data=cancer_files["data"],
               target="malignant", trust=True)
    features = cancer_files["features"]
    assert list(window.ctx.workspace.adapter("A").input_columns) == features
    state = window.ctx.focus.state
    assert state.row is not None and state.feature == features[0]
    assert state.pair == tuple(features[:2])

    portfolio = _visit(window, "Portfolio")
    assert portfolio.model.rowCount() == cancer_files["rows"]
    assert "score A" in portfolio.model.headers and "label (malignant)" in portfolio.model.headers
    assert "AUC" in portfolio.summary_label.text() and "Brier score" in portfolio.summary_label.text()
    assert portfolio.caution.isVisibleTo(portfolio) and "not legal advice" in portfolio.caution.text()
    assert not portfolio.exposure_row.isVisibleTo(portfolio)
    y = pd.read_csv(cancer_files["data"])["malignant"].to_numpy()
    score = portfolio.model.arrays[portfolio.model.headers.index("score A")]
    assert portfolio.metrics["auc"] == pytest.approx(skm.roc_auc_score(y, score), abs=1e-12)

    case = _visit(window, "Case")
    assert case.table.rowCount() == len(features)
    assert case.bar_features and "Contribution bars" in case.bars.title
    # full feature names: the name column as wide as the longest, the name in the tooltip
    longest = max(features, key=len)
    assert case.table.columnWidth(0) >= case.table.fontMetrics().horizontalAdvance(longest)
    assert [case.table.item(i, 0).toolTip() for i in range(len(features))] == features
    # the cutoff's sides named by what the model predicts, not as credit decisions
    assert "the side of" in case.score_label.text()
    assert "estimated probability of malignant = 1" in case.score_label.text()
    assert "adverse" not in case.reasons_panel.message.text()

    effect = _visit(window, "Effect")
    assert f"Effect curve of {features[0]}" in effect.curve_plot.title
    assert f"ALE curve of {features[0]}" in effect.ale_plot.title
    assert "log-odds of 1" in effect.curve_plot.axis_label("left")

    ranking = _visit(window, "Ranking")
    assert "drop in AUC" in ranking.importance_plot.title
    assert sorted(ranking.order) == sorted(features)
    assert sorted(ranking.attribution_order) == sorted(features)
    from workbench.ui.levels.ranking import MAX_BARS

    assert len(features) > MAX_BARS  # 30 features: the top ones drawn, named in the title
    assert _left_ticks(ranking.attribution_plot) == ranking.attribution_order[:MAX_BARS]
    assert _left_ticks(ranking.importance_plot) == ranking.order[:MAX_BARS]
    assert f"top {MAX_BARS} of {len(features)} shown" in ranking.attribution_plot.title
    assert "log-odds of 1" in ranking.attribution_plot.axis_label("bottom")
    widths = _bars(ranking.attribution_plot)[0].opts["width"]
    assert np.all(np.diff(widths) <= 0), "largest mean |attribution| first"
    if ranking.group_labels:  # long blocks are named in short, in full in the hover
        full = ranking.group_labels[0]
        assert ranking._hover_group(0, 0).startswith(full)

    pairs = _visit(window, "Pairs")
    assert pairs.shown is not None and pairs.shown.shape == (len(features),) * 2
    assert sorted(pairs.order) == sorted(features)
    assert "Pair map" in pairs.map_plot.title and features[0] in pairs.map_plot.tip
    top = float(np.nanmax(pairs.shown))
    assert pairs.colorbar.axis.autoSIPrefixScale == 1.0  # the scale's numbers are the values
    low, high = pairs.colorbar.levels()
    if top > 1:  # H of a pair with a tiny joint effect: the scale stops at 1 and says so
        assert (low, high) == (0.0, 1.0) and "H above 1" in pairs.matrix_plot.tip
    else:
        assert high == pytest.approx(max(top, 0.1)) and "H above 1" not in pairs.matrix_plot.tip

    versions = _visit(window, "Versions")
    assert versions.comparison is None
    messages = [i for i in versions.scatter.plot.items if isinstance(i, pg.TextItem)]
    assert messages and "a second model B" in messages[0].toPlainText()

    checks = _visit(window, "Checks")
    checks.run_button.click()
    assert window.ctx.runner.wait_idle(300)
    assert checks.table.rowCount() > 0
    assert all(checks.table.item(i, 0).text() in {"● PASS", "▲ WARN", "■ FAIL"}
               for i in range(checks.table.rowCount()))

    dossier = _visit(window, "Dossier")
    out = tmp_path / "cancer-dossier.html"
    dossier.export(out)
    assert window.ctx.runner.wait_idle(300)
    assert dossier.last_export == out and "cancer.skops" in out.read_text()


def test_motor_demo_every_level_with_exposure(window, motor_files):
    from demo_models.motor import MOTOR_EXPOSURE, MOTOR_TARGET

    open_files(window, model=motor_files["model"], data=motor_files["data"],
               target=MOTOR_TARGET, trust=True)
    adapter = window.ctx.workspace.adapter("A")
    assert adapter.task == "count"
    assert window.ctx.focus.state.feature == "driver_age"  # the first numeric input

    portfolio = _visit(window, "Portfolio")
    assert portfolio.model.rowCount() == MOTOR_ROWS
    assert portfolio.exposure_row.isVisibleTo(portfolio)
    assert portfolio.exposure.currentText() == MOTOR_EXPOSURE
    assert "frequency A" in portfolio.model.headers and "decision" not in portfolio.model.headers
    text = portfolio.summary_label.text()
    assert "per year (exposure-weighted)" in text and "Poisson deviance" in text
    frame = motor_files["frame"]
    claims, e = frame[MOTOR_TARGET].to_numpy(float), frame[MOTOR_EXPOSURE].to_numpy(float)
    rate = portfolio.model.arrays[portfolio.model.headers.index("frequency A")]
    # The frequency set-up: observed rates against predicted rates, weighted by exposure.
    weighted = skm.mean_poisson_deviance(claims / e, rate, sample_weight=e)
    assert portfolio.metrics["poisson_deviance"] == pytest.approx(weighted, rel=1e-12)
    assert f"actual frequency {claims.sum() / e.sum():.4g} per year" in text

    # No exposure: each row is one unit, and the figures are the unweighted ones.
    portfolio.exposure.setCurrentIndex(0)
    portfolio.exposure.activated.emit(0)
    unweighted = skm.mean_poisson_deviance(claims, rate)
    assert portfolio.metrics["poisson_deviance"] == pytest.approx(unweighted, rel=1e-12)
    assert "exposure-weighted" not in portfolio.summary_label.text()
    index = portfolio.exposure.findText(MOTOR_EXPOSURE)
    portfolio.exposure.setCurrentIndex(index)
    portfolio.exposure.activated.emit(index)
    assert portfolio.metrics["poisson_deviance"] == pytest.approx(weighted, rel=1e-12)
    assert not portfolio.caution.isVisibleTo(portfolio)  # prices, not decisions about people

    case = _visit(window, "Case")
    assert case.table.rowCount() == len(adapter.input_columns)
    assert case.bar_features
    assert "predicted frequency" in case.score_label.text()
    reasons = case.reasons_panel.message.text()
    assert "predicted frequency" in reasons and "adverse" not in reasons, reasons

    effect = _visit(window, "Effect")
    assert "Effect curve of driver_age" in effect.curve_plot.title
    assert "log of the predicted mean" in effect.curve_plot.axis_label("left")

    ranking = _visit(window, "Ranking")
    assert "Poisson deviance" in ranking.importance_plot.title
    assert "weighted by exposure" in ranking.importance_plot.title and ranking.importance.exposure
    assert _left_ticks(ranking.attribution_plot) == ranking.attribution_order
    assert sorted(ranking.attribution_order) == sorted(adapter.input_columns)

    pairs = _visit(window, "Pairs")
    assert pairs.shown is not None and len(pairs.order) == len(adapter.input_columns)
    pairs.go(pair=("region", "driver_age"))
    assert window.ctx.runner.wait_idle(300)
    region_ticks = pairs.map_plot.plot.getAxis("bottom")._tickLevels
    assert region_ticks and "metro\nnorth" in [t for _p, t in region_ticks[0]]

    for name in ("Versions", "Checks", "Dossier"):
        level = _visit(window, name)
        assert level.isVisible()
    assert window.levels["Versions"].comparison is None
