"""Mineral densities and material classes, for the mass budget and the default dose limits.

Pure code, no database. Every density names its source: the Handbook of Mineralogy
(Anthony, Bideaux, Bladh and Nichols, Mineralogical Society of America) unless marked
"from memory" (../shared/REFERENCES.md lists them). Where the handbook gives a range, the
value used is the middle and the half-width is kept as its uncertainty.
"""

from __future__ import annotations

import math
import re
from dataclasses import dataclass

HANDBOOK = "Handbook of Mineralogy (Anthony et al.)"
FROM_MEMORY = "from memory"


@dataclass(frozen=True)
class Density:
    """A mineral density in g/cm³ with its half-range and where the value comes from."""

    mineral: str
    g_per_cm3: float
    #: half the spread of the quoted range (0 for a single value), g/cm³
    half_range: float
    source: str
    #: hydrous, organic or anhydrous: what the default dose limits key on
    material_class: str


def _d(mineral: str, low: float, high: float, source: str, material_class: str) -> Density:
    return Density(mineral, (low + high) / 2, (high - low) / 2, source, material_class)


#: the table, by mineral name (lower case)
DENSITIES: dict[str, Density] = {d.mineral: d for d in (
    _d("forsterite", 3.275, 3.275, HANDBOOK, "anhydrous"),
    _d("fayalite", 4.392, 4.392, HANDBOOK, "anhydrous"),
    _d("augite", 3.31, 3.31, HANDBOOK, "anhydrous"),
    _d("calcite", 2.71, 2.71, HANDBOOK, "anhydrous"),
    _d("dolomite", 2.87, 2.87, HANDBOOK, "anhydrous"),
    _d("magnetite", 5.17, 5.18, HANDBOOK, "anhydrous"),
    _d("pyrrhotite", 4.58, 4.65, HANDBOOK, "anhydrous"),
    _d("pentlandite", 4.6, 5.0, HANDBOOK, "anhydrous"),
    _d("lizardite", 2.55, 2.58, HANDBOOK, "hydrous"),
    _d("enstatite", 3.2, 3.3, FROM_MEMORY, "anhydrous"),
    _d("saponite", 2.3, 2.3, FROM_MEMORY, "hydrous"),
    _d("cronstedtite", 3.4, 3.4, FROM_MEMORY, "hydrous"),
    _d("troilite", 4.7, 4.7, FROM_MEMORY, "anhydrous"),
    _d("fe-ni metal", 7.9, 7.9, FROM_MEMORY, "anhydrous"),
    _d("insoluble organic matter", 1.3, 1.5, FROM_MEMORY, "organic"),
)}

#: words in a material description and the mineral they stand for; the word written first
#: names the dominant phase. Group names (serpentine, phyllosilicate, a fine-grained matrix)
#: take lizardite as their stand-in: our choice, no source
WORDS: tuple[tuple[str, str], ...] = (
    ("organic", "insoluble organic matter"), ("matrix", "lizardite"),
    ("saponite", "saponite"), ("cronstedtite", "cronstedtite"), ("lizardite", "lizardite"),
    ("serpentin", "lizardite"), ("phyllosilicate", "lizardite"),
    ("pyrrhotite", "pyrrhotite"), ("pentlandite", "pentlandite"), ("troilite", "troilite"),
    ("magnetite", "magnetite"), ("dolomite", "dolomite"), ("calcite", "calcite"),
    ("carbonate", "calcite"), ("enstatite", "enstatite"), ("augite", "augite"),
    ("forsterite", "forsterite"), ("fayalite", "fayalite"), ("metal", "fe-ni metal"),
)

_FO = re.compile(r"\bfo\s*(\d{1,3}(?:\.\d+)?)\b")


def olivine(forsterite_percent: float) -> Density:
    """Olivine density interpolated linearly in Fe/(Fe+Mg) between forsterite and fayalite."""
    if not 0 <= forsterite_percent <= 100:
        raise ValueError(f"forsterite content must be 0-100 %, not {forsterite_percent}")
    fo, fa = DENSITIES["forsterite"].g_per_cm3, DENSITIES["fayalite"].g_per_cm3
    x_fe = 1 - forsterite_percent / 100
    return Density(f"olivine Fo{forsterite_percent:g}", fo + x_fe * (fa - fo), 0.0,
                   f"{HANDBOOK}, interpolated", "anhydrous")


def density_for(material: str) -> Density | None:
    """The density a material description points to ("olivine (Fo92) ...", "lizardite ...")."""
    text = material.lower()
    match = _FO.search(text)
    if "olivine" in text:
        return olivine(float(match.group(1))) if match else olivine(100.0)
    found = [(text.find(word), mineral) for word, mineral in WORDS if word in text]
    return DENSITIES[min(found)[1]] if found else None


#: words that make a material hydrous or organic even when no density is known
_HYDROUS = ("hydrous", "hydrated", "clay", "phyllosilicate", "serpentin", "saponite",
            "smectite", "lizardite", "cronstedtite", "water")


def material_class(material: str) -> str:
    """hydrous, organic or anhydrous; organic wins, then hydrous (the more dose-sensitive)."""
    text = material.lower()
    if "organic" in text:
        return "organic"
    density = density_for(material)
    if any(word in text for word in _HYDROUS) or (density and density.material_class == "hydrous"):
        return "hydrous"
    return "anhydrous"


def sphere_volume_um3(diameter_um: float) -> float:
    """Volume of a sphere, πd³/6, µm³."""
    return math.pi * diameter_um**3 / 6


def mass_ug(volume_um3: float, density_g_per_cm3: float) -> float:
    """Mass in µg of a volume in µm³: 1 µm³ = 1e-12 cm³ and 1 g = 1e6 µg."""
    return volume_um3 * density_g_per_cm3 * 1e-6


def xct_volume_um3(voxel_count: float, voxel_size_um: float) -> float:
    """Segmented volume from XCT: voxels × voxel size³."""
    return voxel_count * voxel_size_um**3
