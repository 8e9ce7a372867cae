"""The case sheet: HTML and PDF hold the reason texts, the cautions and the sources; user text
is escaped."""

import os
import unicodedata

import numpy as np
import pandas as pd
import pytest
from sklearn.linear_model import LogisticRegression

from workbench.engine.adapter import ModelAdapter
from workbench.engine.attributions import explain
from workbench.engine.flips import nearest_flips
from workbench.engine.reasons import FeatureWording, ReasonTemplates, reason_statements
from workbench.engine.similar import similar_rows, similar_summary
from workbench.report.case_sheet import case_sheet_context, case_sheet_html, write_case_sheet
from workbench.report.render import CAUTIONS

os.environ.setdefault("QT_QPA_PLATFORM", "offscreen")
EVIL = "<script>alert('x')</script> Debt ratio"


def _flat(text: str) -> str:
    """Whitespace collapsed, ligatures (the PDF's "ﬁ") unfolded."""
    return " ".join(unicodedata.normalize("NFKC", text).split())


@pytest.fixture(scope="module")
def sheet():
    rng = np.random.default_rng(0)
    n = 300
    x = pd.DataFrame({"debt_ratio": rng.uniform(0, 1, n).round(3),
                      "income": rng.normal(40, 8, n).round(1),
                      "late": rng.integers(0, 5, n)})
    y = (x["debt_ratio"] * 4 - (x["income"] - 40) / 10 + x["late"] * 0.5
         + rng.normal(0, 0.5, n) > 2.5).astype(int)
    adapter = ModelAdapter(LogisticRegression(max_iter=1000).fit(x, y))
    r = adapter.response(x)
    # just over the cutoff, with a high debt ratio among its reasons
    row = int(np.flatnonzero((r >= 0.5) & (r < 0.8) & (x["debt_ratio"] > 0.7).to_numpy())[0])
    att = explain(adapter, x.iloc[[row]], background=x, background_size=50)
    templates = ReasonTemplates({"debt_ratio": FeatureWording(EVIL, "of income", "{:.0%}")},
                                outcome="the estimated risk")
    reasons = reason_statements(att, x.iloc[[row]], adapter=adapter, cutoff=0.5, templates=templates)
    flips = nearest_flips(adapter, x.iloc[[row]], x, cutoff=0.5, actionable=["debt_ratio", "late"])
    similar = similar_rows(x, row, k=3, scores=r, labels=y)
    context = case_sheet_context(
        adapter=adapter, values_row=x.iloc[[row]], attributions=att, cutoff=0.5, reasons=reasons,
        flips=flips, similar=similar, similar_summary=similar_summary(similar, cutoff=0.5),
        templates=templates, model_name="model <b>one</b>.skops", model_sha256="a" * 64,
        data_name="data.csv", data_sha256="b" * 64, data_rows=n, row=row, label=y.iloc[row])
    return context, reasons, flips


def test_html_holds_reasons_cautions_sources_and_escapes_user_text(sheet, tmp_path):
    context, reasons, flips = sheet
    assert reasons.reasons and flips.found
    assert "debt_ratio" in [q.feature for q in reasons.reasons]
    path = write_case_sheet(tmp_path / "case.html", context)
    html = path.read_text(encoding="utf-8")
    assert "<script>" not in html and "&lt;script&gt;" in html
    assert "<b>one</b>" not in html and "&lt;b&gt;one&lt;/b&gt;" in html
    text = _flat(html)
    for reason in reasons.reasons:
        expected = reason.text.replace("<", "&lt;").replace(">", "&gt;").replace("'", "&#39;")
        assert _flat(expected) in text
    for caution in CAUTIONS:
        assert _flat(caution) in text
    assert "a" * 64 in html and "b" * 64 in html
    assert html.count("data:image/png;base64,") == 1
    assert "Option 1" in html and "Wachter" in html and "Gower" in html


def test_pdf_holds_the_reason_texts(sheet, tmp_path, qapp):
    """``qapp``: a full QApplication, so that the PDF writer does not start a QGuiApplication
    that would stop later window tests in the same process from making widgets."""
    pypdf = pytest.importorskip("pypdf")
    context, reasons, _flips = sheet
    path = write_case_sheet(tmp_path / "case.pdf", context)
    assert path.exists() and path.stat().st_size > 0
    text = _flat(" ".join(page.extract_text() for page in pypdf.PdfReader(path).pages))
    for reason in reasons.reasons:
        assert _flat(reason.text) in text
    assert "Case sheet" in text and _flat(CAUTIONS[2]) in text


def test_a_sheet_without_flip_or_similar_says_so(sheet):
    context, _reasons, _flips = sheet
    html = case_sheet_html({**context, "flips": None, "similar": None})
    assert "Not searched for this sheet." in html and "Not computed for this sheet." in html
