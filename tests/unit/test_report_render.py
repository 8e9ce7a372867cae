"""Report rendering: escaping, self-contained images, PDF text."""

import pytest

from workbench.report import charts
from workbench.report.render import environment, png_data_uri, write_report


def test_user_text_is_escaped_in_html():
    html = environment().from_string("<p>{{ name }}</p>").render(name="<script>alert(1)</script>")
    assert "<script>" not in html and "&lt;script&gt;" in html


def test_pdf_holds_the_text_and_picture(tmp_path):
    pypdf = pytest.importorskip("pypdf")
    png = charts.contribution_bars(["debt ratio", "income"], [0.8, -0.3], base_value=-2.0, output=-1.5,
                                   units="log-odds")
    assert png[:8] == b"\x89PNG\r\n\x1a\n"
    html = f"<h1>Case sheet</h1><p>Debt ratio raised the risk.</p><img src=\"{png_data_uri(png)}\">"
    pdf = write_report(html, tmp_path / "x.pdf", title="t")
    text = " ".join(" ".join(page.extract_text() for page in pypdf.PdfReader(pdf).pages).split())
    assert "Case sheet" in text and "Debt ratio raised the risk." in text
    html_path = write_report(html, tmp_path / "x.html", title="t")
    assert "data:image/png;base64," in html_path.read_text()


def test_unknown_report_kind_is_refused(tmp_path):
    from workbench.engine.errors import InputError

    with pytest.raises(InputError):
        write_report("<p/>", tmp_path / "x.docx", title="t")
