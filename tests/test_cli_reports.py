"""`curation report lineage` and `curation export` on the demo."""

from __future__ import annotations

import json
import re
import shutil
import subprocess
import zipfile

import prov
from click.testing import CliRunner
from datacite import schema45

from curation.cli import main


def _run(url: str, *args: str):
    return CliRunner().invoke(main, [*args, "--db", url])


def test_pdf_report_of_a_particle_with_needles(demo_url: str, tmp_path) -> None:
    out = tmp_path / "kr0302.pdf"
    result = _run(demo_url, "report", "lineage", "KR-0302", "-o", str(out))
    assert result.exit_code == 0, result.output
    data = out.read_bytes()
    assert data.startswith(b"%PDF-") and len(re.findall(rb"/Type\s*/Page(?!s)", data)) >= 2
    if shutil.which("pdftotext"):  # poppler, when installed, reads the text back
        text = subprocess.run(["pdftotext", str(out), "-"], capture_output=True, text=True,
                              check=True).stdout
        assert "KR-0302-N1" in text and "Mass budget" in text


def test_html_csv_and_zip(demo_url: str, tmp_path) -> None:
    for suffix in ("html", "csv", "zip"):
        out = tmp_path / f"r.{suffix}"
        assert _run(demo_url, "report", "lineage", "KR-0305-N1", "-o", str(out)).exit_code == 0
    assert "KR-0305-W1" in (tmp_path / "r.html").read_text()
    assert (tmp_path / "r.csv").read_text().startswith("table,")
    with zipfile.ZipFile(tmp_path / "r.zip") as z:
        assert "KR-0305-mass_budget.csv" in z.namelist()


def test_unknown_suffix_is_refused(demo_url: str, tmp_path) -> None:
    result = _run(demo_url, "report", "lineage", "KR-0302", "-o", str(tmp_path / "r.doc"))
    assert result.exit_code == 2 and "unknown format" in result.output


def test_prov_and_datacite_exports(demo_url: str, tmp_path) -> None:
    out = tmp_path / "p.json"
    assert _run(demo_url, "export", "prov", "KR-0302", "-o", str(out)).exit_code == 0
    doc = prov.read(out.read_text(), format="json")
    assert prov.read(doc.serialize(format="json"), format="json") == doc
    result = _run(demo_url, "export", "datacite", "KR-0302-N1")
    assert result.exit_code == 0
    assert schema45.validate(json.loads(result.output)) is True
