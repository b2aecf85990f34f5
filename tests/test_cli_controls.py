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


def test_controls_from_the_shell(tmp_path) -> None:
    url = f"sqlite:///{tmp_path / 'demo.db'}"
    run = CliRunner().invoke
    assert run(main, ["demo", "--no-serve", "--db", url]).exit_code == 0
    who = ["--as", "rtolvanen"]
    ok = run(main, ["controls", "indicator", STUDY_CODE, "na-ng-cm2", "--name", "Sodium deposit",
                    "--unit", "ng/cm²", "--baseline", "2", "--uncertainty", "0.5",
                    "--threshold-kind", "absolute", "--threshold", "5", "--db", url, *who])
    assert ok.exit_code == 0, ok.output
    good = tmp_path / "good.csv"
    good.write_text("control,indicator,measured_at,value,uncertainty\n"
                    f"{WITNESS},na-ng-cm2,2025-12-01T10:00:00+01:00,9.5,0.4\n")
    bad = tmp_path / "bad.csv"
    bad.write_text("control,indicator,measured_at,value,uncertainty\n"
                   f"{WITNESS},na-ng-cm2,2025-12-01 10:00,9.5,0.4\n"
                   f"{WITNESS},na-ng-cm2,2025-12-01T10:00:00+01:00,x,0.4\n")
    refused = run(main, ["controls", "import", STUDY_CODE, str(bad), "--db", url, *who])
    assert refused.exit_code == 2 and "line 2" in refused.output and "line 3" in refused.output
    assert run(main, ["controls", "import", STUDY_CODE, str(good), "--db", url, *who]).exit_code == 0
    status = run(main, ["controls", "status", STUDY_CODE, "--json", "--db", url])
    failed = {f["indicator"] for f in __import__("json").loads(status.output)["failures"]}
    assert failed == {"particles-per-mm2", "na-ng-cm2"}
