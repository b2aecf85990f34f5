"""`curation controls`: a study's indicators, control links and readings, from the shell."""

from __future__ import annotations

import json
from pathlib import Path

import click
from sqlalchemy import select

from curation.cli import CommandError, command_session, db_option, main, parse_moment
from curation.errors import ImportRejected, NotFound
from curation.model import Event, Indicator
from curation.reports import controls as report
from curation.services import controls as writes
from curation.services.common import item_by_code, person_by_username, study_by_code


@main.group("controls")
@db_option()
def controls_group(db_url: str | None) -> None:
    """Contamination controls of a study: indicators, links, readings."""


@controls_group.command("indicator")
@db_option()
@click.argument("study")
@click.argument("code")
@click.option("--name", required=True, help="What is measured, in words.")
@click.option("--unit", required=True, help="Unit of value, baseline and threshold.")
@click.option("--baseline", type=float, required=True, help="Baseline value.")
@click.option("--uncertainty", type=float, required=True, help="Standard uncertainty of it.")
@click.option("--threshold-kind", type=click.Choice(writes.THRESHOLD_KINDS), required=True,
              help="absolute: fail above --threshold; k-sigma: fail when z > --threshold.")
@click.option("--threshold", type=float, required=True, help="The threshold value or k.")
@click.option("--source", default="", help="Where the baseline comes from.")
@click.option("--as", "username", required=True, help="Username of who records it.")
@click.pass_context
def indicator_command(ctx: click.Context, db_url: str | None, study: str, code: str, name: str,
                      unit: str, baseline: float, uncertainty: float, threshold_kind: str,
                      threshold: float, source: str, username: str) -> None:
    """Define indicator CODE of STUDY with its baseline and threshold."""
    with command_session(ctx, db_url) as session:
        writes.define_indicator(
            session, actor=person_by_username(session, username), study=study_by_code(session, study),
            code=code, name=name, unit=unit, baseline_value=baseline,
            baseline_uncertainty=uncertainty, threshold_kind=threshold_kind,
            threshold_value=threshold, baseline_source=source)
    click.echo(f"Indicator {code} defined for {study}")


@controls_group.command("link")
@db_option()
@click.argument("study")
@click.argument("control")
@click.option("--sample", metavar="CODE", help="The sample the control travels with.")
@click.option("--event", "event_id", type=int, help="The handling event it was present at.")
@click.option("--as", "username", required=True, help="Username of who records it.")
@click.pass_context
def link_command(ctx: click.Context, db_url: str | None, study: str, control: str,
                 sample: str | None, event_id: int | None, username: str) -> None:
    """Link CONTROL to a sample it travels with or a handling event it was present at."""
    with command_session(ctx, db_url) as session:
        event = session.get(Event, event_id) if event_id is not None else None
        if event_id is not None and event is None:
            raise NotFound(f"no event {event_id}")
        writes.link_control(session, actor=person_by_username(session, username),
                            study=study_by_code(session, study), control=item_by_code(session, control),
                            sample=item_by_code(session, sample) if sample else None, event=event)
    click.echo(f"Linked {control}")


@controls_group.command("reading")
@db_option()
@click.argument("study")
@click.argument("control")
@click.argument("indicator")
@click.option("--value", type=float, required=True, help="The measured value.")
@click.option("--uncertainty", type=float, required=True, help="Its standard uncertainty.")
@click.option("--at", "at", required=True, help="When, ISO 8601 with UTC offset.")
@click.option("--source", default="", help="How it was measured.")
@click.option("--as", "username", required=True, help="Username of who measured it.")
@click.pass_context
def reading_command(ctx: click.Context, db_url: str | None, study: str, control: str,
                    indicator: str, value: float, uncertainty: float, at: str, source: str,
                    username: str) -> None:
    """Record a reading of INDICATOR on CONTROL."""
    with command_session(ctx, db_url) as session:
        ind = session.scalar(select(Indicator).where(
            Indicator.study_id == study_by_code(session, study).id, Indicator.code == indicator))
        if ind is None:
            raise NotFound(f"study {study} has no indicator {indicator!r}")
        writes.record_control_reading(
            session, actor=person_by_username(session, username), indicator=ind,
            control=item_by_code(session, control), measured_at=parse_moment("--at", at), value=value,
            uncertainty=uncertainty, source=source)
    click.echo(f"Recorded {indicator} = {value:g} on {control}")


@controls_group.command("import")
@db_option()
@click.argument("study")
@click.argument("file", type=click.Path(exists=True, dir_okay=False, path_type=Path))
@click.option("--as", "username", required=True, help="Username of who imports them.")
@click.pass_context
def import_command(ctx: click.Context, db_url: str | None, study: str, file: Path,
                   username: str) -> None:
    """Import readings from a CSV file (control, indicator, measured_at, value, uncertainty):
    every row or none; every bad row is named with its line."""
    try:
        with command_session(ctx, db_url) as session:
            rows = writes.import_control_readings_csv(
                session, actor=person_by_username(session, username),
                study=study_by_code(session, study), text=file.read_text(encoding="utf-8-sig"),
                source=file.name)
    except ImportRejected as exc:
        raise CommandError("nothing imported:\n  " + "\n  ".join(exc.problems)) from exc
    click.echo(f"Imported {len(rows)} reading(s) from {file}")


@controls_group.command("status")
@db_option()
@click.argument("study")
@click.option("--depth", default=report.DEFAULT_DEPTH, show_default=True,
              type=click.IntRange(1, 4), help="How many shared exposures to follow.")
@click.option("--json", "as_json", is_flag=True, help="Print a JSON object.")
@click.pass_context
def status_command(ctx: click.Context, db_url: str | None, study: str, depth: int,
                   as_json: bool) -> None:
    """Every failed control reading of STUDY and the items that shared an exposure with it."""
    with command_session(ctx, db_url) as session:
        r = report.controls_report(session, study, depth)
        failures = [{"control": f.reading.event.item.code, "reading": f.reading.event.id,
                     "indicator": f.reading.indicator.code, "z": round(f.reading.verdict.z, 3),
                     "at_risk": [{"item": item.code, "depth": risk.depth,
                                  "links": [[link.kind, list(link.event_ids)]
                                            for link in risk.path]}
                                 for item, risk in f.at_risk]} for f in r.failures]
    if as_json:
        click.echo(json.dumps({"study": study, "failures": failures}, indent=2))
        return
    if not failures:
        click.echo(f"No control of {study} has failed.")
    for fail in failures:
        codes = ", ".join(a["item"] for a in fail["at_risk"]) or "nothing"
        click.echo(f"{fail['control']} failed {fail['indicator']} (reading #{fail['reading']}, "
                   f"z = {fail['z']}): at risk: {codes}")
