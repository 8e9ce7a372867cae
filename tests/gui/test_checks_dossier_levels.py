"""The Checks and Dossier levels: statuses with shapes, evidence, links, export, projects."""

import json

import numpy as np
import pandas as pd
import pytest
import skops.io as sio
from sklearn.compose import ColumnTransformer
from sklearn.linear_model import LogisticRegression
from sklearn.pipeline import make_pipeline
from sklearn.preprocessing import OneHotEncoder, StandardScaler

from workbench.session.project import open_project

EVIL = "<script>alert(1)</script>"


@pytest.fixture
def small_files(tmp_path):
    rng = np.random.default_rng(0)
    n = 300
    df = pd.DataFrame({"income": rng.normal(40, 9, n).round(1),
                       "debt": rng.uniform(0, 1, n).round(3),
                       "region": rng.choice(["north", "south"], n)})
    df["bad"] = (rng.random(n) < 1 / (1 + np.exp(-(3 * df["debt"] - 2)))).astype(int)
    ct = ColumnTransformer([("n", StandardScaler(), ["income", "debt"]),
                            ("c", OneHotEncoder(), ["region"])])
    model = make_pipeline(ct, LogisticRegression()).fit(df[["income", "debt", "region"]], df["bad"])
    sio.dump(model, tmp_path / "m.skops")
    df.to_csv(tmp_path / "d.csv", index=False)
    return {"model": tmp_path / "m.skops", "data": tmp_path / "d.csv", "dir": tmp_path}


def _open_small(window, files):
    assert window.open_model(files["model"], "A", trust=True)
    assert window.open_data(files["data"], target="bad")


def test_checks_level_shows_status_words_shapes_evidence_and_links(demo_window):
    window = demo_window
    window.show_level("Checks")
    level = window.levels["Checks"]
    level.set_expectation("debt_to_income", "increasing")
    level.set_expectation("age_years", "decreasing")
    level.group.setCurrentText("applicant_group")
    level.run_button.click()
    window.ctx.runner.wait_idle()
    ids = [level.table.item(i, 1).text() for i in range(level.table.rowCount())]
    assert set(ids[:2]) == {"monotonicity:debt_to_income", "monotonicity:age_years"}
    assert {"stability:score", "adverse_impact:applicant_group", "leakage"} <= set(ids)
    for i in range(level.table.rowCount()):
        text = level.table.item(i, 0).text()
        status = level.table.item(i, 0).data(256)  # Qt.UserRole
        assert text in {"● PASS", "▲ WARN", "■ FAIL"} and status.upper() in text
    row = ids.index("adverse_impact:applicant_group")
    level.table.selectRow(row)
    shown = level.evidence.toPlainText()
    assert "screening indicator" in shown and "ratio" in shown
    row = ids.index("monotonicity:debt_to_income")
    level.table.selectRow(row)
    assert level.link.text() == "Show in Effect"
    level.link.click()
    assert window.ctx.focus.state.level == "Effect"
    assert window.ctx.focus.state.feature == "debt_to_income"
    project = window.ctx.project
    assert project.expectations == {"debt_to_income": "increasing", "age_years": "decreasing"}
    assert len(project.checks) == len(ids) and project.audit[-1]["what"] == "audit checks"


def test_dossier_level_exports_html_with_user_text_escaped_and_saves(window, small_files):
    _open_small(window, small_files)
    window.show_level("Dossier")
    level = window.levels["Dossier"]
    level.notes.setPlainText(f"All good.\n\nExcept {EVIL}.")
    level.fields["name"].setText(f"Ana {EVIL}")
    level.fields["decision"].setText("approve")
    level.section_boxes["pairs"].setChecked(False)
    window.ctx.focus.update(row=4)
    level.add_case.click()
    level.add_case.click()
    assert level.cases_label.text() == "Chosen cases: row 4"
    out = small_files["dir"] / "d.html"
    level.export(out)
    window.ctx.runner.wait_idle()
    assert level.last_export == out
    html = out.read_text()
    assert "<script>" not in html and html.count("&lt;script&gt;") == 2
    assert 'href="#notes"' in html and 'href="#pairs"' not in html
    saved = level.save(small_files["dir"] / "p.wbench")
    doc = json.loads(saved.read_text())
    assert doc["notes"].startswith("All good.") and doc["signoff"]["decision"] == "approve"
    assert "pairs" not in doc["sections"] and doc["inputs"]["data"]["sha256"]
    assert doc["cases"] == [4] and 'id="cases"' in html and "Row 4" in html
    assert any(e["what"] == "dossier written" for e in doc["audit"])
    assert open_project(saved).signoff["name"] == f"Ana {EVIL}"
    level.notes.setPlainText("typed after saving")
    side = level.autosave_now()
    assert side is not None and side.name == "p.wbench.autosave"
    assert open_project(saved, recover=True).notes == "typed after saving"
    assert open_project(saved).notes.startswith("All good.")


def test_opening_a_project_with_a_changed_input_relinks_or_stops(window, small_files,
                                                                   monkeypatch, qtbot):
    from workbench.ui.levels import dossier as dossier_level
    from workbench.ui.window import MainWindow

    _open_small(window, small_files)
    level = window.levels["Dossier"]
    level.notes.setPlainText("first session")
    path = level.save(small_files["dir"] / "p.wbench")
    data = small_files["data"]
    data.write_text(data.read_text().replace("north", "North", 1))

    fresh = MainWindow(qsettings=window.qsettings, synchronous=True)
    qtbot.addWidget(fresh)
    other = fresh.levels["Dossier"]
    monkeypatch.setattr(dossier_level, "ask_relink", lambda parent, change: None)
    assert not other.open(path)
    assert "Stopped" in other.status.text() and "changed" in other.status.text()
    assert fresh.ctx.workspace.data is None

    monkeypatch.setattr(dossier_level, "ask_relink", lambda parent, change: data)
    assert other.open(path)
    project = fresh.ctx.project
    assert project.notes == "first session" and project.audit[-1]["what"] == "re-link input"
    assert fresh.ctx.workspace.data is not None and fresh.ctx.workspace.adapter("A") is not None
    assert fresh.ctx.workspace.settings.target == "bad"


def test_file_menu_offers_the_project_file(window):
    file_menu = window.menuBar().actions()[0].menu()
    texts = [a.text() for a in file_menu.actions()]
    assert "Open project…" in texts and "Save project…" in texts
    assert texts.index("Open project…") < texts.index("Quit")
