"""The Pairs level shows the SHAP interaction matrix for a tree model and explains its absence
for a linear one."""

import numpy as np


def _pairs(window):
    return next(w for w in window.findChildren(object) if type(w).__name__ == "PairsLevel")


def test_shap_interaction_matrix_for_the_tree_challenger(demo_window, qtbot):
    demo_window.ctx.focus.update(model="B")
    demo_window.show_level("Pairs")
    pairs = _pairs(demo_window)
    pairs.kind.setCurrentIndex(pairs.kind.findData("shap"))
    qtbot.waitUntil(lambda: pairs.shap is not None, timeout=120_000)
    m = np.asarray(pairs.shap.matrix)
    assert m.shape == (len(pairs.shap.features),) * 2
    assert np.isnan(np.diag(m)).all() and np.nanmax(m) > 0
    assert pairs.shown is not None


def test_shap_interaction_matrix_is_refused_for_the_linear_champion(demo_window, qtbot):
    demo_window.ctx.focus.update(model="A")
    demo_window.show_level("Pairs")
    pairs = _pairs(demo_window)
    pairs.kind.setCurrentIndex(pairs.kind.findData("shap"))
    qtbot.waitUntil(lambda: "shap" in pairs.errors, timeout=60_000)
    assert pairs.shap is None
    assert "tree models only" in pairs.errors["shap"]
