"""Environment readings: ISO class on entry, glovebox CSV import all or nothing."""

from __future__ import annotations

import pytest
from sqlalchemy import func, select

from curation.environment import class_limit
from curation.errors import ImportRejected, InvalidInput
from curation.model import EnvironmentReading
from curation.services import environment as env
from curation.services import stations
from tests.conftest import hours


@pytest.fixture
def box(session):
    return stations.add_location(session, actor="test", code="GB-1", name="Box 1", kind="glovebox")


def test_particle_counts_are_classified(session, operator, box) -> None:
    # ISO 14644-1:2015: counts at the ISO 5 limit at 0.5 um and well under it at 5 um.
    reading = env.record_particle_counts(session, actor=operator, location=box,
                                         measured_at=hours(0),
                                         counts_per_m3={0.5: class_limit(5, 0.5), 5.0: 10})
    assert reading.iso_class == 5.0
    assert reading.details["counts_per_m3"]["0.5"] == pytest.approx(3516.76, abs=0.01)


def test_csv_import_is_all_or_nothing_and_names_every_bad_row(session, operator, box) -> None:
    text = ("measured_at,o2_ppm,h2o_ppm\n"
            "2026-03-02T08:00:00+00:00,0.4,0.5\n"
            "2026-03-02T08:05:00,0.4,0.5\n"
            "2026-03-02T08:10:00+00:00,abc,0.5\n"
            "2026-03-02T08:15:00+00:00,0.4,-2\n")
    before = session.scalar(select(func.count()).select_from(EnvironmentReading))
    with pytest.raises(ImportRejected) as caught:
        env.import_atmosphere_csv(session, actor=operator, location=box, text=text)
    assert [p.split(":")[0] for p in caught.value.problems] == ["line 3", "line 4", "line 5"]
    assert "no timezone" in caught.value.problems[0]
    assert "o2_ppm 'abc'" in caught.value.problems[1]
    assert session.scalar(select(func.count()).select_from(EnvironmentReading)) == before


def test_csv_import_names_missing_columns(session, operator, box) -> None:
    with pytest.raises(ImportRejected, match="missing column"):
        env.import_atmosphere_csv(session, actor=operator, location=box, text="time,o2\n1,2\n")


def test_climate_ranges(session, operator, box) -> None:
    with pytest.raises(InvalidInput, match="humidity_pct"):
        env.record_climate(session, actor=operator, location=box, measured_at=hours(0),
                           temperature_C=20, humidity_pct=140)
