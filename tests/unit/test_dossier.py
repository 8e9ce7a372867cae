"""The dossier: built from a project, user text escaped, PDF text holds the section titles."""

import unicodedata

import numpy as np
import pandas as pd
import pytest
import skops.io as sio
from sklearn.compose import ColumnTransformer
from sklearn.linear_model import LogisticRegression
from sklearn.metrics import roc_auc_score
from sklearn.pipeline import make_pipeline
from sklearn.preprocessing import OneHotEncoder, StandardScaler

from workbench.engine.errors import InputError
from workbench.report.dossier import SECTIONS, dossier_context, dossier_html, write_dossier
from workbench.session.project import InputsChanged, Project, save_project

EVIL = "<script>alert(1)</script>"


@pytest.fixture(scope="module")
def project(tmp_path_factory):
    d = tmp_path_factory.mktemp("dossier")
    rng = np.random.default_rng(0)
    n = 600
    df = pd.DataFrame({
        EVIL: rng.normal(size=n).round(3),
        "debt": rng.uniform(0, 1, n).round(3),
        "region": rng.choice(["north", "south"], n),
        "month": rng.choice(["2024-01", "2024-02", "2024-03"], n),
        "group": rng.choice(["A", "B"], n),
    })
    logit = -1 + 2 * df["debt"] + 0.5 * df[EVIL]
    df["bad"] = (rng.random(n) < 1 / (1 + np.exp(-logit))).astype(int)
    ct = ColumnTransformer([("num", StandardScaler(), [EVIL, "debt"]),
                            ("cat", OneHotEncoder(), ["region"])])
    model = make_pipeline(ct, LogisticRegression()).fit(df[[EVIL, "debt", "region"]], df["bad"])
    sio.dump(model, d / "model.skops")
    df.to_csv(d / "data.csv", index=False)
    p = Project()
    p.set_input("model_a", d / "model.skops")
    p.set_input("data", d / "data.csv")
    p.settings.update(target="bad", cutoff=0.5, group="group")
    p.expectations = {"debt": "increasing"}
    p.display_names = {"debt": {"name": f"Debt {EVIL}", "units": "fraction"}}
    p.notes = f"Looked fine.\n\nBut {EVIL} in a note."
    p.signoff = {"name": f"Ana {EVIL}", "role": "Validator", "date": "2026-12-01",
                 "decision": "approve with conditions", "conditions": "re-check in 6 months"}
    p.cases = [0, 5]
    save_project(p, d / "p.wbench")
    return p


def _text_of_pdf(path) -> str:
    pypdf = pytest.importorskip("pypdf")
    text = " ".join(page.extract_text() for page in pypdf.PdfReader(path).pages)
    # Qt writes ligatures (ff, fi): compare in compatibility form, whitespace normalised
    return " ".join(unicodedata.normalize("NFKC", text).split())


def test_user_text_is_escaped_in_the_html(project):
    html = dossier_html(dossier_context(project, resamples=50))
    assert "<script>" not in html
    assert "&lt;script&gt;alert(1)&lt;/script&gt;" in html
    assert html.count("&lt;script&gt;") >= 4  # column name, display name, note, signer
    assert "data:image/png;base64," in html and "<img src=\"http" not in html


def test_every_section_is_present_with_a_table_of_contents(project):
    ctx = dossier_context(project, resamples=50)
    html = dossier_html(ctx)
    for key, title in SECTIONS:
        assert f'href="#{key}"' in html and title.replace("'", "&#39;") in html
    assert {c["id"] for c in ctx["checks"]} >= {"monotonicity:debt", "adverse_impact:group",
                                                 "leakage", "calibration", "additivity"}
    assert ctx["performance"]["interval"]["low"] <= ctx["performance"]["interval"]["auc"]
    assert ctx["performance"]["interval"]["auc"] <= ctx["performance"]["interval"]["high"]
    frame = pd.read_csv(project.input_path("data"))
    from workbench.engine.adapter import ModelAdapter
    from workbench.engine.loading import load_model

    p = ModelAdapter(load_model(project.input_path("model_a")).estimator).response(frame)
    assert ctx["performance"]["interval"]["auc"] == pytest.approx(roc_auc_score(frame["bad"], p))
    assert ctx["datasets"][0]["period"] == {"column": "month", "first": "2024-01", "last": "2024-03"}
    assert len(ctx["cases"]) == 2 and ctx["versions"] is None
    assert all(c["reasons_message"] and c["inputs"] for c in ctx["cases"])  # via the case sheet
    assert {i["name"] for i in ctx["cases"][0]["inputs"]} >= {f"Debt {EVIL}", "region"}
    assert any(e["what"].startswith("dossier:") for e in project.audit)
    assert "screening indicator" in html


def test_pdf_text_holds_the_section_titles(project, tmp_path, qapp):
    # qapp: a full QApplication, so that widget tests later in the same run can still start
    path = write_dossier(project, tmp_path / "d.pdf")
    text = _text_of_pdf(path)
    for _, title in SECTIONS:
        assert title in text, title
    assert "approve with conditions" in text


def test_sections_can_be_chosen_and_unknown_ones_are_refused(project, tmp_path):
    path = write_dossier(project, tmp_path / "d.html", sections=["identity", "notes", "signoff"])
    html = path.read_text()
    assert 'href="#notes"' in html and 'href="#ranking"' not in html
    with pytest.raises(InputError, match="unknown dossier section"):
        dossier_context(project, sections=["identity", "gossip"])
    with pytest.raises(InputError, match=".html or .pdf"):
        write_dossier(project, tmp_path / "d.docx")


def test_changed_input_stops_the_dossier(project, tmp_path):
    data = project.input_path("data")
    original = data.read_bytes()
    try:
        data.write_bytes(original + b"\n")
        with pytest.raises(InputsChanged):
            write_dossier(project, tmp_path / "d.html")
    finally:
        data.write_bytes(original)
