"""The import-linter layers contract: imports only run downward (DESIGN.md)."""

from __future__ import annotations

from pathlib import Path

from importlinter.cli import lint_imports

ROOT = Path(__file__).resolve().parent.parent


def test_layers_contract_holds(monkeypatch) -> None:
    monkeypatch.chdir(ROOT)
    assert lint_imports(config_filename=str(ROOT / ".importlinter"), no_cache=True) == 0


def test_nothing_below_web_imports_flask() -> None:
    offenders = []
    for path in (ROOT / "curation").rglob("*.py"):
        rel = path.relative_to(ROOT / "curation")
        if rel.parts[0] in {"web", "cli.py", "__init__.py", "migrations"}:
            continue
        text = path.read_text(encoding="utf-8")
        if "import flask" in text or "from flask" in text:
            offenders.append(str(rel))
    assert offenders == []
