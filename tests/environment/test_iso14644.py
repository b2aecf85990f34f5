"""ISO 14644-1:2015 cleanroom classes against the standard's Table 1."""

from __future__ import annotations

import pytest

from curation.environment import (
    TABLE_SIZES_UM, check_atmosphere, class_limit, class_needed, classify, meets, table_limit,
)
from curation.errors import InvalidInput

# ISO 14644-1:2015, Table 1 "ISO classes of air cleanliness by particle concentration",
# maximum particles/m3 at sizes >= 0.1, 0.2, 0.3, 0.5, 1 and 5 um; None = blank cell.
# Values from memory, agreeing with ../shared/REFERENCES.md and a third-party copy of the table.
TABLE_1 = {
    1: (10, None, None, None, None, None),
    2: (100, 24, 10, None, None, None),
    3: (1_000, 237, 102, 35, None, None),
    4: (10_000, 2_370, 1_020, 352, 83, None),
    5: (100_000, 23_700, 10_200, 3_520, 832, None),
    6: (1_000_000, 237_000, 102_000, 35_200, 8_320, 293),
    7: (None, None, None, 352_000, 83_200, 2_930),
    8: (None, None, None, 3_520_000, 832_000, 29_300),
    9: (None, None, None, 35_200_000, 8_320_000, 293_000),
}


def test_table_1_has_33_printed_cells() -> None:
    assert sum(v is not None for row in TABLE_1.values() for v in row) == 33


@pytest.mark.parametrize("iso_class", sorted(TABLE_1))
def test_formula_reproduces_every_cell_of_table_1(iso_class: int) -> None:
    assert tuple(table_limit(iso_class, size) for size in TABLE_SIZES_UM) == TABLE_1[iso_class]


def test_unrounded_limits() -> None:
    # ISO 14644-1:2015 formula (REFERENCES.md gives the raw values 3 516.76 and 29 251.1).
    assert class_limit(5, 0.5) == pytest.approx(3516.76, abs=0.01)
    assert class_limit(8, 5.0) == pytest.approx(29251.1, abs=0.1)


def test_a_count_exactly_at_a_limit_stays_in_that_class() -> None:
    assert class_needed(0.5, class_limit(5, 0.5)) == 5.0
    assert class_needed(0.5, class_limit(5, 0.5) * 1.01) == 5.1


def test_intermediate_classes_in_tenths() -> None:
    # ISO 14644-1:2015 allows intermediate classes in 0.1 steps, same formula.
    count = class_limit(6.5, 0.5)
    assert class_needed(0.5, count) == 6.5
    assert meets(6.5, {0.5: count}) and not meets(6.4, {0.5: count})


def test_every_channel_must_meet_the_class() -> None:
    counts = {0.5: 3000.0, 5.0: 250.0}  # ISO 5 at 0.5 um but only ISO 6 at 5 um
    result = classify(counts)
    assert result.deciding_size_um == 5.0
    assert result.iso_class == class_needed(5.0, 250.0)
    assert meets(result.iso_class, counts)


@pytest.mark.parametrize(("size", "field"), [(0.05, "size_um"), (10.0, "size_um")])
def test_sizes_outside_the_formula_are_refused(size: float, field: str) -> None:
    with pytest.raises(InvalidInput) as caught:
        class_needed(size, 10.0)
    assert caught.value.field == field and "0.1 to 5.0" in str(caught.value)


def test_dirtier_than_class_9_is_refused() -> None:
    with pytest.raises(InvalidInput, match="ISO class 9"):
        classify({0.5: 1e9})


def test_glovebox_atmosphere() -> None:
    # Common practice, no source: purified N2 boxes hold < 1 ppm O2 and H2O.
    assert check_atmosphere(0.4, 0.6, max_o2_ppm=1, max_h2o_ppm=1).ok
    check = check_atmosphere(12.0, 0.6, max_o2_ppm=1, max_h2o_ppm=1)
    assert not check.ok and "O₂ 12 ppm above 1 ppm" in check.problems
