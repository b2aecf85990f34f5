"""`curation report controls` on the demo: HTML and PDF, and a refused format."""

from __future__ import annotations

from click.testing import CliRunner

from curation.cli import main
from curation.demo_data.scenario import STUDY_CODE
from curation.demo_data.setting import WITNESS


def test_controls_report_html_and_pdf(tmp_path) -> None:
    url = f"sqlite:///{tmp_path / 'demo.db'}"
    assert CliRunner().invoke(main, ["demo", "--no-serve", "--db", url]).exit_code == 0
    html, pdf = tmp_path / "c.html", tmp_path / "c.pdf"
    for out in (html, pdf):
        result = CliRunner().invoke(main, ["report", "controls", STUDY_CODE, "--db", url,
                                           "-o", str(out)])
        assert result.exit_code == 0, result.output
        assert "1 failed reading(s)" in result.output
    assert WITNESS in html.read_text(encoding="utf-8")
    assert pdf.read_bytes().startswith(b"%PDF")
    bad = CliRunner().invoke(main, ["report", "controls", STUDY_CODE, "--db", url,
                                    "-o", str(tmp_path / "c.docx")])
    assert bad.exit_code == 2 and "use .html or .pdf" in bad.output
