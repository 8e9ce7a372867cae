"""The reasons panel shows what the engine returns and hands flips and rows back by signal."""

import numpy as np
import pandas as pd
import pytest
from PySide6.QtCore import Qt
from sklearn.linear_model import LogisticRegression

from workbench.engine.adapter import ModelAdapter
from workbench.engine.attributions import explain
from workbench.engine.reasons import FeatureWording, ReasonTemplates
from workbench.report.render import CAUTIONS
from workbench.ui.reasons_panel import CaseInputs, ReasonsPanel, WordingDialog


@pytest.fixture
def case():
    rng = np.random.default_rng(0)
    n = 300
    x = pd.DataFrame({"debt_ratio": rng.uniform(0, 1, n).round(3),
                      "income": rng.normal(40, 8, n).round(1),
                      "late": rng.integers(0, 5, n)})
    y = pd.Series((x["debt_ratio"] * 4 - (x["income"] - 40) / 10 + x["late"] * 0.5
                   + rng.normal(0, 0.5, n) > 2.5).astype(int))
    adapter = ModelAdapter(LogisticRegression(max_iter=1000).fit(x, y))
    r = adapter.response(x)
    row = int(np.flatnonzero((r >= 0.5) & (r < 0.8))[0])
    att = explain(adapter, x.iloc[[row]], background=x, background_size=50)
    templates = ReasonTemplates({"debt_ratio": FeatureWording("<b>Debt</b> ratio")})
    return CaseInputs(adapter, x.iloc[[row]], att, x, 0.5, row=row, templates=templates,
                      background_size=50, labels=y, key=("test", row))


def test_panel_shows_reasons_flips_similar_and_cautions(qtbot, case, tmp_path):
    panel = ReasonsPanel()
    qtbot.addWidget(panel)
    panel.set_case(case, actionable=["debt_ratio", "late"])
    # the sides of the cutoff named by what the model predicts, not as credit decisions
    assert "on the side of higher estimated probability of 1" in panel.message.text()
    assert "adverse" not in panel.message.text()
    texts = [panel.reason_table.item(i, 1).text() for i in range(panel.reason_table.rowCount())]
    assert texts == panel.reasons.texts and 1 <= len(texts) <= 4
    assert any("<b>Debt</b> ratio" in t for t in texts)  # shown as typed, never as markup
    assert panel.cautions.text() == " ".join(CAUTIONS)
    assert panel.similar_table.rowCount() == 5

    panel.find_flips()
    assert panel.flips is not None and panel.flips.found
    assert panel.flip_table.rowCount() == len(panel.flips.options)
    with qtbot.waitSignal(panel.trial_requested) as signal:
        panel.flip_table.cellClicked.emit(0, 1)
    trial = case.values_row.copy()
    for feature, value in signal.args[0].items():
        assert feature in ("debt_ratio", "late")
        trial[feature] = value
    assert case.adapter.response(trial)[0] < 0.5

    with qtbot.waitSignal(panel.row_requested) as signal:
        panel.similar_table.cellClicked.emit(1, 0)
    assert signal.args[0] == panel.similar[1].row != case.row

    panel.check_stability()
    assert panel.stability is not None
    marks = {panel.reason_table.item(i, 2).text() for i in range(panel.reason_table.rowCount())}
    assert marks <= {"yes", "not stable"}

    written = panel.write_sheet(tmp_path / "sheet.html")
    html = (tmp_path / "sheet.html").read_text(encoding="utf-8")
    assert written and "&lt;b&gt;Debt&lt;/b&gt; ratio" in html and "<b>Debt</b>" not in html
    assert "Option 1" in html and "stable (rank changed)" in html
    assert "Case sheet written" in panel.sheet_status.text()


def test_flip_without_actionable_features_says_so(qtbot, case):
    panel = ReasonsPanel()
    qtbot.addWidget(panel)
    panel.set_case(case)
    panel.find_flips()
    assert "Tick at least one feature" in panel.flip_message.text()
    item = panel.actionable.item(0)
    item.setCheckState(Qt.CheckState.Checked)
    panel.find_flips()
    assert panel.flips is not None


def test_wording_dialog_edits_and_refuses_unknown_placeholders(qtbot, case):
    panel = ReasonsPanel()
    qtbot.addWidget(panel)
    panel.set_case(case)
    dialog = WordingDialog(case.adapter.input_columns, case.templates, panel)
    qtbot.addWidget(dialog)
    first = panel.reasons.reasons[0].feature
    row = case.adapter.input_columns.index(first)
    dialog.table.item(row, 1).setText("Late payments")
    dialog.table.item(row, 4).setText("{name} at {value} {direction} {outcome} ({rank_phrase}).")
    dialog.outcome.setText("the estimated risk")
    kept = "debt_ratio" if first != "debt_ratio" else "late"
    before = case.templates.wording(kept).display_name
    templates = dialog.result_templates()
    panel.set_templates(templates)
    assert templates.wording(kept).display_name == before  # untouched rows keep their wording
    texts = panel.reasons.texts
    assert texts[0].startswith("Late payments at ") and texts[0].endswith("(more than any other factor).")
    assert all("the estimated risk" in t for t in texts)
    dialog.table.item(row, 4).setText("{nmae} went up")
    dialog._accept()
    assert "unknown placeholder" in dialog.problem.text()


def test_case_level_loads_a_flip_as_trial_values(demo_window, tmp_path):
    """In the window: the Case level embeds the panel; a flip option becomes trial values and
    the re-scored case lies on the other side of the cutoff."""
    win = demo_window
    ws = win.ctx.workspace
    cutoff = ws.settings.cutoff
    r = ws.adapter("A").response(ws.frame)
    near = int(np.flatnonzero((r >= cutoff) & (r < cutoff + 0.1))[0])  # just over the cutoff
    win.ctx.focus.update(row=near)
    win.show_level("Case")
    case = win.levels["Case"]
    panel = case.reasons_panel
    assert panel.case.row == near
    assert panel.reasons is not None and panel.reasons.adverse
    assert panel.reason_table.rowCount() == len(panel.reasons.reasons) > 0
    panel.set_actionable(["debt_to_income", "loan_amount", "revolving_utilisation", "term_months"])
    panel.find_flips()
    assert panel.flips is not None and panel.flips.found, panel.flip_message.text()
    option = panel.flips.options[0]
    panel.flip_table.cellClicked.emit(0, 1)
    assert set(case.trial) == set(option.features)
    assert case.trial_score < cutoff <= case.data_score
    pypdf = pytest.importorskip("pypdf")
    path = panel.write_sheet(tmp_path / "sheet.pdf")
    text = " ".join(" ".join(page.extract_text() for page in pypdf.PdfReader(path).pages).split())
    assert "lending_champion.skops" in text, text[-900:]
    assert ws.slot("A").sha256 in text, text[-900:]  # monospace: no "ff" ligature in the hash


def test_marking_a_feature_not_allowed_restates_the_reasons(qtbot, case):
    panel = ReasonsPanel()
    qtbot.addWidget(panel)
    panel.set_case(case, actionable=["debt_ratio", "late", "income"])
    first = panel.reasons.reasons[0].feature
    row = case.adapter.input_columns.index(first)
    with qtbot.waitSignal(panel.not_allowed_changed) as signal:
        panel.not_allowed_list.item(row).setCheckState(Qt.CheckState.Checked)
    assert signal.args[0] == (first,)
    assert first not in [r.feature for r in panel.reasons.reasons]
    assert first not in panel._ticked()  # a flip never changes a not-allowed feature
    texts = [panel.reason_table.item(i, 1).text() for i in range(panel.reason_table.rowCount())]
    assert texts == panel.reasons.texts


def test_wording_and_not_allowed_marks_live_in_the_project(demo_window, tmp_path):
    """The demo's reason wording comes from the project; edits and not-allowed marks go back
    into it, are saved in the project file, and a reopened project's wording is applied."""
    from workbench.engine.reasons import FeatureWording, ReasonTemplates
    from workbench.session.project import open_project, save_project
    from workbench.ui.context import project_of

    win = demo_window
    win.show_level("Case")
    case = win.levels["Case"]
    panel = case.reasons_panel
    project = project_of(win.ctx)
    assert project.reason_templates["features"]["debt_to_income"]["display_name"] != "debt_to_income"
    assert panel.templates.features["debt_to_income"].display_name == \
        project.reason_templates["features"]["debt_to_income"]["display_name"]
    edited = panel.templates.with_feature("annual_income", FeatureWording(display_name="Yearly pay <b>"))
    panel.templates_changed.emit(edited)
    panel.not_allowed_changed.emit(("region",))
    assert project.reason_templates["features"]["annual_income"]["display_name"] == "Yearly pay <b>"
    assert project.settings["not_allowed"] == ["region"]
    path = save_project(project, tmp_path / "p.wbench")
    reopened = open_project(path, allow_changed=True)
    assert ReasonTemplates.from_dict(reopened.reason_templates).features["annual_income"].display_name == "Yearly pay <b>"
    win.ctx.project = reopened
    case.refresh(force=True)
    assert panel.templates.features["annual_income"].display_name == "Yearly pay <b>"
    assert panel.not_allowed == ("region",)


def test_a_frequency_model_names_the_cutoff_sides_by_frequency(qtbot):
    """A claim-frequency model (Poisson regression): neither reasons nor similar rows speak
    of adverse or favourable decisions."""
    from sklearn.linear_model import PoissonRegressor

    rng = np.random.default_rng(1)
    x = pd.DataFrame({"driver_age": rng.uniform(18, 80, 200).round(0),
                      "power": rng.uniform(40, 200, 200).round(0)})
    y = pd.Series(rng.poisson(np.exp(-2 + x["power"] / 150)), name="claims")
    adapter = ModelAdapter(PoissonRegressor().fit(x, y))
    r = adapter.response(x)
    row = int(np.argmax(r))
    att = explain(adapter, x.iloc[[row]], background=x, background_size=50)
    panel = ReasonsPanel()
    qtbot.addWidget(panel)
    panel.set_case(CaseInputs(adapter, x.iloc[[row]], att, x, float(np.median(r)), row=row,
                              labels=y, key=("freq", row)))
    message = panel.message.text()
    assert "on the side of higher predicted frequency" in message, message
    assert panel.reason_table.rowCount() >= 1
    similar = panel.similar_message.text()
    assert "side of higher predicted frequency" in similar, similar
    for text in (message, similar):
        assert "adverse" not in text and "favourable" not in text


def test_panel_jobs_are_picklable_pool_tasks(qtbot, case):
    """Nearest flip, stability and similar rows go to worker processes: picklable tasks (no
    closures), and what they return is what the panel shows."""
    import pickle

    from workbench.ui.jobs import JobRunner
    from workbench.ui.pool_tasks import PoolTask

    runner = JobRunner(synchronous=True)
    sent = []
    request = runner.request
    runner.request = lambda key, title, fn, *a, **k: (sent.append((title, fn)),
                                                      request(key, title, fn, *a, **k))[1]
    panel = ReasonsPanel(runner)
    qtbot.addWidget(panel)
    panel.set_case(case, actionable=["debt_ratio", "late"])
    panel.find_flips()
    panel.check_stability()
    titles = [t for t, _fn in sent]
    assert titles == ["Similar rows of one case", "Nearest flip of one case",
                      "Reason stability of one case"]
    for _title, fn in sent:
        assert isinstance(fn, PoolTask)
        pickle.loads(pickle.dumps(fn))
    assert panel.similar_table.rowCount() == 5
    assert panel.flip_table.rowCount() == len(panel.flips.options) >= 1
    assert "other background samples" in panel.stability_note.text()
