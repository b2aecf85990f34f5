"""Report pages: the per-particle lineage report (HTML, PDF, CSV) and an item's budget plot."""

from __future__ import annotations

from flask import Blueprint, Response, render_template, url_for
from markupsafe import Markup

from curation.reports import lineage, lineage_pdf, lineage_svg, lineage_tables, plots
from curation.reports.budgets import item_budget
from curation.services.common import item_by_code
from curation.web.app import db_session

bp = Blueprint("reports", __name__)


@bp.get("/reports/lineage/<code>")
def lineage_page(code: str) -> str:
    """The lineage report of the particle the item belongs to, for screen and print."""
    return _page(lineage.build(db_session(), code))


def _page(report: lineage.LineageReport) -> str:
    picture = lineage_svg.render(
        report.tree, current_id=report.particle.id,
        label=f"Lineage of {report.particle.code}",
        href=lambda i: url_for("items.item_page", code=i.code))
    return render_template("reports/lineage.html", r=report, picture=Markup(picture),
                           plot=Markup(report_plot(report)), tables=lineage_tables.tables(report))


def render_html(report: lineage.LineageReport) -> str:
    """The report page as a file, outside any request (for the CLI); links are site-relative."""
    from curation import create_app

    app = create_app({"DATABASE_URL": "sqlite://", "SECRET_KEY": "offline"})
    with app.test_request_context():
        return _page(report)


def report_plot(report: lineage.LineageReport) -> str:
    """The particle's dose and exposure plot, with its study limits."""
    limits = {lim.name: lim.limit for lim in report.budget.limits}
    return plots.budget_svg(report.budget.exposure.series, limits["electron dose"],
                            limits["air exposure"], f"Dose and exposure of {report.particle.code}")


def _download(body: bytes | str, media_type: str, name: str) -> Response:
    return Response(body, mimetype=media_type,
                    headers={"Content-Disposition": f'attachment; filename="{name}"'})


@bp.get("/reports/lineage/<code>.pdf")
def lineage_pdf_file(code: str) -> Response:
    """The lineage report as PDF."""
    report = lineage.build(db_session(), code)
    return _download(lineage_pdf.render(report), "application/pdf",
                     f"lineage-{report.particle.code}.pdf")


@bp.get("/reports/lineage/<code>.zip")
def lineage_zip_file(code: str) -> Response:
    """The lineage report's tables, one CSV each, zipped."""
    report = lineage.build(db_session(), code)
    return _download(lineage_tables.as_zip(report), "application/zip",
                     f"lineage-{report.particle.code}.zip")


@bp.get("/items/<code>/budget.svg")
def budget_plot(code: str) -> Response:
    """Cumulative electron dose and air exposure of one item over time, as SVG."""
    session = db_session()
    budget = item_budget(session, item_by_code(session, code))
    limits = {lim.name: lim.limit for lim in budget.limits}
    svg = plots.budget_svg(budget.exposure.series, limits["electron dose"],
                           limits["air exposure"],
                           f"Cumulative electron dose and air exposure of {code}")
    return Response(svg, mimetype="image/svg+xml")
