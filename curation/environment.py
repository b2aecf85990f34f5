"""Environment computations: ISO 14644-1:2015 cleanroom classes from particle counts,
and glovebox atmosphere checks. Pure functions, no database."""

from __future__ import annotations

import math
from collections.abc import Mapping
from dataclasses import dataclass

from curation.errors import InvalidInput

#: the considered particle sizes of ISO 14644-1:2015 Table 1, micrometres
TABLE_SIZES_UM = (0.1, 0.2, 0.3, 0.5, 1.0, 5.0)
#: size range over which the class-limit formula applies, micrometres
MIN_SIZE_UM, MAX_SIZE_UM = 0.1, 5.0
MIN_CLASS, MAX_CLASS = 1.0, 9.0

# Table 1 leaves these cells blank: concentrations too low to sample (ISO 1 above 0.1 um,
# ISO 2 at 0.5 um and up, ...), sizes below 0.5 um for ISO 7-9, and 5 um up to ISO 5.
_FIRST_PRINTED_SIZE = {7: 0.5, 8: 0.5, 9: 0.5}
_LAST_PRINTED_SIZE = {1: 0.1, 2: 0.3, 3: 0.5, 4: 1.0, 5: 1.0}


def class_limit(iso_class: float, size_um: float) -> float:
    """Maximum particles per m3 at sizes >= size_um: 10^N x (0.1/D)^2.08 (unrounded)."""
    _check_size(size_um)
    _check_class(iso_class)
    return 10.0**iso_class * (0.1 / size_um) ** 2.08


def _round_sig(value: float, figures: int) -> float:
    if value == 0:
        return 0.0
    digits = figures - 1 - math.floor(math.log10(abs(value)))
    return round(value, digits)


def table_limit(iso_class: int, size_um: float) -> int | None:
    """The printed Table 1 cell: three significant figures, whole particles; None when blank."""
    if size_um not in TABLE_SIZES_UM:
        raise InvalidInput("size_um", size_um, "one of " + ", ".join(map(str, TABLE_SIZES_UM)))
    if size_um < _FIRST_PRINTED_SIZE.get(iso_class, 0.0):
        return None
    if size_um > _LAST_PRINTED_SIZE.get(iso_class, MAX_SIZE_UM):
        return None
    return int(round(_round_sig(class_limit(iso_class, size_um), 3)))


def _check_size(size_um: float) -> None:
    if not MIN_SIZE_UM <= size_um <= MAX_SIZE_UM:
        raise InvalidInput("size_um", size_um,
                           f"a particle size from {MIN_SIZE_UM} to {MAX_SIZE_UM} µm")


def _check_class(iso_class: float) -> None:
    if not MIN_CLASS <= iso_class <= MAX_CLASS:
        raise InvalidInput("iso_class", iso_class, f"an ISO class from {MIN_CLASS:g} to {MAX_CLASS:g}")


@dataclass(frozen=True)
class Classification:
    """The ISO class a set of counts meets, and the channel that decided it."""

    iso_class: float
    deciding_size_um: float
    #: per channel: (size µm, particles per m3, the class that channel alone needs)
    channels: tuple[tuple[float, float, float], ...]


def class_needed(size_um: float, per_m3: float) -> float:
    """The lowest class (0.1 steps) whose limit at size_um admits per_m3 particles."""
    _check_size(size_um)
    if per_m3 < 0:
        raise InvalidInput("particles_per_m3", per_m3, "zero or more")
    if per_m3 == 0:
        return MIN_CLASS
    exact = math.log10(per_m3) + 2.08 * math.log10(size_um / 0.1)
    # Round up to the next 0.1 step; the tolerance keeps an exact limit in its own class.
    stepped = math.ceil(round(exact * 10, 9)) / 10
    return max(MIN_CLASS, stepped)


def classify(counts_per_m3: Mapping[float, float]) -> Classification:
    """The ISO 14644-1 class met by cumulative counts (particles/m3 at >= each size)."""
    if not counts_per_m3:
        raise InvalidInput("counts", {}, "at least one size channel")
    channels = tuple(sorted((size, count, class_needed(size, count))
                            for size, count in counts_per_m3.items()))
    deciding = max(channels, key=lambda ch: ch[2])
    if deciding[2] > MAX_CLASS:
        raise InvalidInput("particles_per_m3", deciding[1],
                           f"at most {class_limit(MAX_CLASS, deciding[0]):.3g} per m³ at "
                           f"≥ {deciding[0]} µm (ISO class 9)")
    return Classification(deciding[2], deciding[0], channels)


def meets(iso_class: float, counts_per_m3: Mapping[float, float]) -> bool:
    """Whether every channel is at or under the class limit."""
    return all(count <= class_limit(iso_class, size) * (1 + 1e-12)
               for size, count in counts_per_m3.items())


@dataclass(frozen=True)
class AtmosphereCheck:
    """A glovebox reading against its limits."""

    ok: bool
    problems: tuple[str, ...]


def check_atmosphere(o2_ppm: float | None, h2o_ppm: float | None, *,
                     max_o2_ppm: float, max_h2o_ppm: float) -> AtmosphereCheck:
    """O2 and H2O in ppm against the limits a study or facility sets."""
    problems = []
    if o2_ppm is None or h2o_ppm is None:
        problems.append("no O₂/H₂O reading")
    if o2_ppm is not None and o2_ppm > max_o2_ppm:
        problems.append(f"O₂ {o2_ppm:g} ppm above {max_o2_ppm:g} ppm")
    if h2o_ppm is not None and h2o_ppm > max_h2o_ppm:
        problems.append(f"H₂O {h2o_ppm:g} ppm above {max_h2o_ppm:g} ppm")
    return AtmosphereCheck(not problems, tuple(problems))
