"""The window on the small demo: levels, links, history, trial values, trust, errors, jobs."""

import threading
import time

import numpy as np
import pytest
from PySide6.QtWidgets import QMessageBox

from tests.gui.conftest import DEMO_ROWS

LEVELS = ["Portfolio", "Case", "Effect", "Ranking", "Pairs", "Versions", "Checks", "Dossier"]


def test_rail_lists_every_registered_level(window):
    assert [window.rail.item(i).text() for i in range(window.rail.count())] == LEVELS


def test_visit_every_level_shows_its_results(demo_window):
    win = demo_window
    for name in LEVELS:
        win.show_level(name)
        assert win.current_level().name == name
        assert win.rail.currentItem().text() == name
    assert win.levels["Portfolio"].model.rowCount() == DEMO_ROWS
    case = win.levels["Case"]
    assert case.table.rowCount() == len(win.ctx.workspace.adapter("A").input_columns)
    assert case.bar_features, "contribution bars drawn"
    assert "Contribution bars" in case.bars.title
    effect = win.levels["Effect"]
    assert "Effect curve of debt_to_income" in effect.curve_plot.title
    assert "ALE curve of debt_to_income" in effect.ale_plot.title
    assert "Attribution scatter of debt_to_income" in effect.scatter_plot.title
    assert effect.ice_lines.shape == np.asarray(effect.curve.result.ice).shape
    assert "log-odds" in effect.curve_plot.axis_label("left")
    ranking = win.levels["Ranking"]
    assert "Permutation importance" in ranking.importance_plot.title
    assert sorted(ranking.order) == sorted(win.ctx.workspace.adapter("A").input_columns)
    pairs = win.levels["Pairs"]
    assert pairs.shown is not None and pairs.shown.shape == (len(pairs.order),) * 2
    assert "Pair map" in pairs.map_plot.title


def test_portfolio_segment_filter_and_summary(demo_window):
    win = demo_window
    portfolio = win.levels["Portfolio"]
    frame = win.ctx.workspace.frame
    expected = int((frame["employment_type"] == "self-employed").sum())
    portfolio.segment.add_condition("employment_type", "=", "self-employed")
    assert portfolio.model.rowCount() == expected
    assert f"{expected:,}</b> of {DEMO_ROWS:,} rows" in portfolio.summary_label.text()
    assert "AUC" in portfolio.summary_label.text()
    portfolio.segment.add_condition("age_years", "≥", "40")
    both = int(((frame["employment_type"] == "self-employed") & (frame["age_years"] >= 40)).sum())
    assert portfolio.model.rowCount() == both
    portfolio.segment.add_condition("age_years", "≥", "forty")
    assert "not a number" in portfolio.segment.error.text()


def test_portfolio_sorts_by_score(demo_window):
    portfolio = demo_window.levels["Portfolio"]
    score_col = next(i for i, h in enumerate(portfolio.model.headers) if h.startswith("score"))
    from PySide6.QtCore import Qt

    portfolio.model.sort(score_col, Qt.SortOrder.DescendingOrder)
    scores = portfolio.model.arrays[score_col][portfolio.model.rows]
    assert np.all(np.diff(scores) <= 0)


def test_double_click_row_opens_case(demo_window):
    win = demo_window
    portfolio = win.levels["Portfolio"]
    win.show_level("Portfolio")
    position = portfolio.model.position(3)
    portfolio.open_table_row(3)
    assert win.ctx.focus.state.level == "Case"
    assert win.ctx.focus.state.row == position
    assert f"row {position}" in win.levels["Case"].heading.text()


def test_trial_values_rescore_and_keep_the_original(demo_window):
    win = demo_window
    win.show_level("Case")
    case = win.levels["Case"]
    before = case.trial_score
    row = [case.table.item(i, 0).text() for i in range(case.table.rowCount())].index("debt_to_income")
    original_text = case.table.item(row, 1).text()
    case.table.item(row, 2).setText("0.05" if float(original_text) > 0.3 else "0.9")
    assert case.trial == {"debt_to_income": pytest.approx(float(case.table.item(row, 2).text()))}
    assert case.trial_score != pytest.approx(before)
    assert case.data_score == pytest.approx(before)
    assert "with trial values" in case.score_label.text()
    assert case.table.item(row, 1).text() == original_text  # the value in the data stays
    assert "debt_to_income" in case.bar_features  # re-attributed with the trial value
    case.reset_trial()
    assert case.trial == {}
    assert case.trial_score == pytest.approx(before)


def test_trial_text_value_through_the_combo(demo_window):
    win = demo_window
    win.show_level("Case")
    case = win.levels["Case"]
    rows = [case.table.item(i, 0).text() for i in range(case.table.rowCount())]
    combo = case.table.cellWidget(rows.index("employment_type"), 2)
    other = next(combo.itemText(i) for i in range(combo.count()) if combo.itemText(i) != combo.currentText())
    before = case.trial_score
    combo.setCurrentText(other)
    assert case.trial["employment_type"] == other
    assert case.trial_score != pytest.approx(before)


def test_case_bar_opens_effect_with_the_row(demo_window):
    win = demo_window
    win.show_level("Case")
    case = win.levels["Case"]
    feature = case.bar_features[0]
    case.click_bar_at(0.1)
    assert win.ctx.focus.state.level == "Effect"
    assert win.ctx.focus.state.feature == feature
    assert feature in win.levels["Effect"].heading.text()


def test_ranking_bar_opens_effect(demo_window):
    win = demo_window
    win.show_level("Ranking")
    ranking = win.levels["Ranking"]
    top = ranking.order[0]
    ranking.click_bar_at(0)
    assert win.ctx.focus.state.level == "Effect" and win.ctx.focus.state.feature == top
    assert f"Effect curve of {top}" in win.levels["Effect"].curve_plot.title


def test_effect_ice_line_opens_case(demo_window):
    win = demo_window
    win.show_level("Effect")
    effect = win.levels["Effect"]
    k = 3
    x = float(effect.ice_x[1])
    assert effect.ice_row_near(x, float(effect.ice_lines[k, 1]), tolerance=1e-9) == effect.ice_rows[k]
    effect.open_case(effect.ice_row_near(x, float(effect.ice_lines[k, 1]), tolerance=1e-9))
    assert win.ctx.focus.state.level == "Case" and win.ctx.focus.state.row == effect.ice_rows[k]


def test_effect_scatter_hover_names_the_row_under_the_cursor(demo_window):
    win = demo_window
    win.show_level("Effect")
    effect = win.levels["Effect"]
    point = effect.scatter_item.points()[5]
    text = effect._hover_scatter(point.pos().x(), point.pos().y())
    assert text is not None and text.startswith("row ") and "contribution" in text
    row = int(text.split(":")[0].removeprefix("row "))
    assert row in set(effect.scatter_rows.tolist())
    far = float(np.nanmax(effect.scatter_y)) * 10 + 100
    assert effect._hover_scatter(point.pos().x(), far) is None


def test_effect_point_and_example_open_case(demo_window):
    win = demo_window
    win.show_level("Effect")
    effect = win.levels["Effect"]
    point = effect.scatter_item.points()[5]
    effect._point_clicked(effect.scatter_item, [point])
    assert win.ctx.focus.state.level == "Case"
    assert win.ctx.focus.state.row == int(point.data())
    win.ctx.focus.back()
    assert win.ctx.focus.state.level == "Effect"
    example = effect.telling_row()
    effect.open_telling_example()
    assert win.ctx.focus.state.row == example and win.ctx.focus.state.level == "Case"


def test_pairs_cell_opens_pair_map(demo_window):
    win = demo_window
    win.show_level("Pairs")
    pairs = win.levels["Pairs"]
    pairs.click_cell(1, 0)
    assert win.ctx.focus.state.pair == (pairs.order[0], pairs.order[1])
    assert f"over {pairs.order[0]} and {pairs.order[1]}" in pairs.map_plot.tip
    assert "joint attribution" in pairs.pair_scatter.title
    for index in range(pairs.kind.count()):
        pairs.kind.setCurrentIndex(index)
        assert pairs.matrix_plot.title
    assert "×" in (pairs._hover(1, 0) or "")
    # the unnormalised strength is the H job's pair_strength, in the clustering order
    pairs.kind.setCurrentIndex(pairs.kind.findData("h_strength"))
    assert "output units" in pairs.matrix_plot.title
    feats = list(pairs.h.features)
    pos = [feats.index(f) for f in pairs.order]
    expected = np.asarray(pairs.h.pair_strength)[np.ix_(pos, pos)]
    np.testing.assert_allclose(pairs.shown, expected, equal_nan=True)


def test_back_and_forward_through_focus_history(demo_window):
    win = demo_window
    focus = win.ctx.focus
    win.show_level("Ranking")
    win.show_level("Pairs")
    assert focus.back() and focus.state.level == "Ranking"
    assert win.current_level().name == "Ranking"
    assert focus.forward() and focus.state.level == "Pairs"
    assert not win.focus_bar.forward.isEnabled()
    assert win.focus_bar.back.isEnabled()


def test_model_b_is_the_challenger(demo_window):
    win = demo_window
    win.ctx.focus.update(model="B", level="Case")
    case = win.levels["Case"]
    assert "lending_challenger" in case.heading.text()
    assert "collections_contacts_6m" in case.bar_features or case.table.rowCount() == 16


def test_pickle_refused_in_the_trust_dialog_loads_nothing(demo_window, tmp_path, monkeypatch):
    import joblib
    from sklearn.linear_model import LogisticRegression

    from workbench.ui import dialogs

    path = tmp_path / "model.joblib"
    joblib.dump(LogisticRegression().fit([[0.0], [1.0]], [0, 1]), path)
    asked = []
    monkeypatch.setattr(dialogs, "ask_trust", lambda parent, request: asked.append(request) or False)
    before = demo_window.ctx.workspace.slot("A")
    assert demo_window.open_model(path, "A") is False
    assert len(asked) == 1 and asked[0].path == path and len(asked[0].sha256) == 64
    assert "run" in asked[0].risk
    assert demo_window.ctx.workspace.slot("A") is before


def test_skops_untrusted_types_are_listed_and_refusal_keeps_model(demo_window, demo_paths, monkeypatch):
    from workbench.ui import dialogs

    asked = []
    monkeypatch.setattr(dialogs, "ask_trust", lambda parent, request: asked.append(request) or False)
    before = demo_window.ctx.workspace.slot("B")
    assert demo_window.open_model(demo_paths["lending_challenger"], "B") is False
    assert asked and "TreePredictor" in " ".join(asked[0].untrusted)
    assert demo_window.ctx.workspace.slot("B") is before


def test_trust_dialog_shows_file_facts(qtbot, tmp_path):
    from workbench.ui.dialogs import TrustDialog, TrustRequest

    path = tmp_path / "m.pkl"
    path.write_bytes(b"not really a pickle")
    dialog = TrustDialog(TrustRequest.for_file(path))
    qtbot.addWidget(dialog)
    from PySide6.QtWidgets import QLabel

    texts = " ".join(label.text() for label in dialog.findChildren(QLabel))
    assert "m.pkl" in texts and "SHA-256" in texts and "19 bytes" in texts
    assert dialog.refuse_button.isDefault()


def test_bad_data_file_shows_message_and_keeps_the_window(demo_window, tmp_path):
    win = demo_window
    bad = tmp_path / "broken.csv"
    bad.write_bytes(b"\x00\x01\x02garbage")
    data_before = win.ctx.workspace.data
    assert win.open_data(bad) is False
    boxes = [b for b in win.findChildren(QMessageBox) if b.isVisible()]
    assert boxes and "broken.csv" in boxes[-1].text()
    assert win.ctx.workspace.data is data_before
    assert win.isVisible()
    win.show_level("Portfolio")
    assert win.levels["Portfolio"].model.rowCount() == DEMO_ROWS


def test_data_missing_model_columns_asks_and_keeps_old_data(demo_window, tmp_path, monkeypatch):
    from workbench.ui import dialogs

    path = tmp_path / "few.csv"
    path.write_text("age_years,annual_income\n30,20000\n40,30000\n")
    asked = []
    monkeypatch.setattr(dialogs, "ask_open_despite", lambda p, what, f: asked.append(f) or False)
    before = demo_window.ctx.workspace.data
    assert demo_window.open_data(path) is False
    assert any("missing column" in f.message for f in asked[0])
    assert demo_window.ctx.workspace.data is before


def test_recent_files_use_the_given_settings(demo_window, demo_paths, qsettings):
    demo_window.open_data(demo_paths["lending_reference"], "reference")
    recent = demo_window.recent_files()
    assert recent[0] == ("reference", str(demo_paths["lending_reference"].resolve()))
    assert qsettings.value("recent_files")


def test_plot_export_png_and_svg(demo_window, tmp_path):
    plot = demo_window.levels["Case"].bars
    demo_window.show_level("Case")
    png, svg = plot.export(tmp_path / "bars.png"), plot.export(tmp_path / "bars.svg")
    assert png.stat().st_size > 1000
    assert "<svg" in svg.read_text()[:2000]


def test_snapshot_writes_one_png_per_level(demo_window, tmp_path):
    from workbench.ui.app import snapshot

    paths = snapshot(demo_window, tmp_path)
    assert [p.name for p in paths] == [f"{i}_{n.lower()}.png" for i, n in enumerate(LEVELS, 1)]
    assert all(p.stat().st_size > 5000 for p in paths)


# ---- jobs ------------------------------------------------------------------------------------
def _slow(progress, cancel, seconds=30.0):
    from workbench.engine.jobs import step

    end = time.perf_counter() + seconds
    while time.perf_counter() < end:
        step(progress, cancel, 0.5, "working")
        time.sleep(0.01)
    return "finished"


def test_cancel_a_running_job_from_the_job_area(qtbot, qsettings):
    from workbench.ui.window import MainWindow

    win = MainWindow(qsettings=qsettings, synchronous=False)
    qtbot.addWidget(win)
    runner = win.ctx.runner
    outcomes, done = [], []
    runner.job_ended.connect(lambda job, outcome: outcomes.append(outcome))
    job = runner.request(("slow",), "A slow job", _slow, done.append)
    qtbot.waitUntil(lambda: job.id in win.job_area.rows, timeout=2000)
    row = win.job_area.rows[job.id]
    assert row.title.text().startswith("A slow job")
    qtbot.mouseClick(row.cancel, __import__("PySide6.QtCore", fromlist=["Qt"]).Qt.MouseButton.LeftButton)
    qtbot.waitUntil(lambda: outcomes == ["cancelled"], timeout=1000)
    assert done == [] and runner.running == [] and job.id not in win.job_area.rows


def test_result_for_an_old_focus_is_dropped_but_cached(qtbot):
    from workbench.ui.jobs import JobRunner

    runner = JobRunner(synchronous=False)
    shown = []
    wanted = threading.Event()
    runner.request(("k",), "quick", lambda p, c: 42, shown.append, relevant=wanted.is_set)
    qtbot.waitUntil(lambda: not runner.running, timeout=2000)
    assert shown == [] and runner.dropped == 1
    runner.request(("k",), "quick", lambda p, c: 0, shown.append)
    assert shown == [42]  # from the cache, not recomputed


def test_synchronous_runner_reports_failures(qtbot):
    from workbench.engine.errors import InputError
    from workbench.ui.jobs import JobRunner

    runner = JobRunner(synchronous=True)
    errors = []

    def fails(progress, cancel):
        raise InputError("column 'x' is empty")

    runner.request(("bad",), "fails", fails, lambda r: None, on_error=errors.append)
    assert [str(e) for e in errors] == ["column 'x' is empty"]
    assert not runner.has(("bad",))


def test_dropped_model_goes_to_the_free_slot_and_data_replaces_data(window, demo_paths, monkeypatch):
    from workbench.ui import dialogs

    monkeypatch.setattr(dialogs, "ask_trust", lambda parent, request: True)
    assert window.open_dropped(demo_paths["lending_champion"])
    assert window.ctx.workspace.slot("A").name == "lending_champion.skops"
    assert window.open_dropped(demo_paths["lending_challenger"])
    assert window.ctx.workspace.slot("B").name == "lending_challenger.skops"
    assert window.open_dropped(demo_paths["lending_reference"])
    assert window.ctx.workspace.data.path == demo_paths["lending_reference"]
    assert not window.open_dropped(demo_paths["lending_reference"].with_suffix(".docx"))


def test_level_and_history_shortcuts(window):
    shortcuts = {a.text(): a.shortcut().toString() for m in window.menuBar().findChildren(type(window.recent_menu))
                 for a in m.actions()}
    for i, name in enumerate(LEVELS, start=1):
        assert shortcuts[name] == f"Alt+{i}"
    assert shortcuts["Back"] == "Alt+Left" and shortcuts["Forward"] == "Alt+Right"
    assert shortcuts["Quit"] and shortcuts["Open model (A)…"]


def test_open_command_is_registered():
    from workbench.cli import build_parser

    args = build_parser().parse_args(["open", "m.skops", "d.csv", "--target", "y", "--trust"])
    assert (str(args.model), str(args.data), args.target, args.trust) == ("m.skops", "d.csv", "y", True)
