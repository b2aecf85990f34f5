"""The invented cast of the demo: mission, body, facility, laboratories, people, places, particles.

Every name and code here is made up for the demo. Parameter values are typical ones from
/work/shared/REFERENCES.md; mineral densities are from the Handbook of Mineralogy (Anthony et
al.) unless marked "from memory".
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from datetime import datetime, timedelta, timezone

#: the ledger actor of every system row the scenario writes (people, places, instruments, ...)
DEMO_ACTOR = "demo-scenario"

MISSION = "Pellucid sample-return mission"
BODY = "asteroid Karvessa"
FACILITY = "Amberlane Sample Curation Facility"
LAB_A = "Vantmoor Planetary Materials Laboratory"
LAB_B = "Sorrel Bay Nanoanalysis Centre"

#: the three sites keep their own clocks, in different UTC offsets
TZ_FACILITY = timezone(timedelta(hours=-6), "Amberlane")
TZ_A = timezone(timedelta(hours=1), "Vantmoor")
TZ_B = timezone(timedelta(hours=9), "Sorrel Bay")


def at(tz: timezone, text: str) -> datetime:
    """A local wall-clock time ("2025-10-14 09:10") at a site, timezone-aware."""
    return datetime.fromisoformat(text).replace(tzinfo=tz)


def at_facility(text: str) -> datetime:
    """Wall-clock time at the curation facility."""
    return at(TZ_FACILITY, text)


def at_a(text: str) -> datetime:
    """Wall-clock time at the first laboratory (XCT, SEM, FIB)."""
    return at(TZ_A, text)


def at_b(text: str) -> datetime:
    """Wall-clock time at the second laboratory (TEM, atom probe)."""
    return at(TZ_B, text)


#: role -> (username, full name, affiliation)
PEOPLE = {
    "facility": ("rtolvanen", "Rhea Tolvanen", FACILITY),
    "curator_a": ("jekwueme", "Jonas Ekwueme-Hart", LAB_A),
    "xct": ("thalloran", "Teodor Halloran", LAB_A),
    "fib": ("mcastelvey", "Mira Castel-Vey", LAB_A),
    "pi": ("lpenhallow", "Lucia Penhallow", LAB_A),
    "curator_b": ("arenfield", "Akiko Renfield", LAB_B),
    "tem": ("svarganyi", "Sun-hee Varganyi", LAB_B),
    "apt": ("elindqvar", "Emeka Lindqvar", LAB_B),
}

#: (code, name, kind, laboratory, ISO 14644-1 class)
LOCATIONS = [
    ("AMB-VAULT", "Nitrogen cabinet vault", "store", FACILITY, None),
    ("VPL-LAB", "Receiving and preparation lab", "lab", LAB_A, None),
    ("VPL-STORE", "Dry-nitrogen store, room B12", "store", LAB_A, None),
    ("VPL-GB1", "Nitrogen glovebox 1", "glovebox", LAB_A, None),
    ("VPL-CR", "Sample preparation cleanroom", "cleanroom", LAB_A, 5.0),
    ("VPL-XCT", "X-ray tomography room", "instrument", LAB_A, None),
    ("VPL-FIB", "Dual-beam FIB-SEM room", "instrument", LAB_A, None),
    ("SBN-LAB", "Goods-in laboratory", "lab", LAB_B, None),
    ("SBN-STORE", "Sample store, level 2", "store", LAB_B, None),
    ("SBN-GB", "Nitrogen glovebox", "glovebox", LAB_B, None),
    ("SBN-TEM", "S/TEM suite", "instrument", LAB_B, None),
    ("SBN-APT", "Atom probe laboratory", "instrument", LAB_B, None),
    ("TRANSIT", "With the courier", "in-transit", "", None),
]

#: (code, name, technique families, location code)
INSTRUMENTS = [
    ("VPL-XCT-1", "Laboratory-source X-ray microscope", "xct", "VPL-XCT"),
    ("VPL-DB-1", "Dual-beam FIB-SEM with EDS, EBSD and TKD detectors",
     "sem eds ebsd tkd fib mounting", "VPL-FIB"),
    ("VPL-CT-1", "Carbon thread coater", "coating", "VPL-CR"),
    ("SBN-TEM-1", "Probe-corrected S/TEM with EELS spectrometer", "tem stem eels", "SBN-TEM"),
    ("SBN-APT-1", "Laser-pulsed atom probe", "apt", "SBN-APT"),
]

#: (code, name, instrument code or None, location code)
STATIONS = [
    ("VPL-XCT-PC", "XCT acquisition PC", "VPL-XCT-1", "VPL-XCT"),
    ("VPL-DB-PC", "FIB-SEM support PC", "VPL-DB-1", "VPL-FIB"),
    ("VPL-CT-PC", "Coater log tablet", "VPL-CT-1", "VPL-CR"),
    ("VPL-GB1-PC", "Glovebox 1 log tablet", None, "VPL-GB1"),
    ("VPL-DESK", "Custody desk", None, "VPL-LAB"),
    ("SBN-TEM-PC", "S/TEM support PC", "SBN-TEM-1", "SBN-TEM"),
    ("SBN-APT-PC", "Atom probe support PC", "SBN-APT-1", "SBN-APT"),
    ("SBN-DESK", "Custody desk", None, "SBN-LAB"),
]

# Densities, g/cm3. Lizardite 2.55-2.58 and calcite 2.71, dolomite 2.87, magnetite 5.17-5.18,
# pyrrhotite 4.58-4.65: Handbook of Mineralogy. Olivine Fo92: forsterite 3.275 and fayalite
# 4.392 interpolated linearly in Fe/(Fe+Mg) = 0.08 -> 3.364. Saponite ~2.3: from memory.
LIZARDITE, DOLOMITE, OLIVINE_FO92, SAPONITE, PYRRHOTITE = 2.57, 2.87, 3.364, 2.3, 4.61


@dataclass(frozen=True)
class ParticleSpec:
    """One returned particle as the facility describes it."""

    code: str
    material: str
    #: equivalent-sphere diameter, micrometres
    diameter_um: float
    #: density of the dominant phase, g/cm3
    density: float
    #: "weighed" (microbalance) or "xct" (XCT volume x density)
    method: str

    @property
    def volume_um3(self) -> float:
        return round(math.pi / 6 * self.diameter_um**3, -2)

    @property
    def mass_ug(self) -> float:
        # 1 um3 = 1e-12 cm3 and 1 g = 1e6 ug, so ug = um3 * (g/cm3) * 1e-6
        return round(self.volume_um3 * self.density * 1e-6, 3)

    @property
    def mass_uncertainty_ug(self) -> float:
        if self.method == "weighed":
            return 0.3  # the facility's microbalance, standard uncertainty
        # 5 % on the XCT volume and 4 % on the density, in quadrature
        return round(self.mass_ug * math.hypot(0.05, 0.04), 3)


PARTICLES = [
    ParticleSpec("KR-0301", "serpentine-saponite matrix with magnetite framboids", 84,
                 LIZARDITE, "xct"),
    ParticleSpec("KR-0302", "fine-grained phyllosilicate matrix, space-weathered face", 112,
                 LIZARDITE, "xct"),
    ParticleSpec("KR-0303", "coarse olivine (Fo92) with a matrix rim", 205, OLIVINE_FO92,
                 "weighed"),
    ParticleSpec("KR-0304", "dolomite-bearing matrix", 76, DOLOMITE, "xct"),
    ParticleSpec("KR-0305", "matrix with pyrrhotite laths, smooth weathered face", 98,
                 LIZARDITE, "xct"),
    ParticleSpec("KR-0306", "friable saponite-rich aggregate", 168, SAPONITE, "weighed"),
    ParticleSpec("KR-0307", "phyllosilicate matrix with carbonate veinlets", 91, LIZARDITE,
                 "xct"),
    ParticleSpec("KR-0308", "pyrrhotite-rich clast in matrix", 64, PYRRHOTITE, "xct"),
    ParticleSpec("KR-0309", "phyllosilicate matrix, angular", 102, LIZARDITE, "xct"),
    ParticleSpec("KR-0310", "saponite matrix with organic-rich nodules", 73, SAPONITE, "xct"),
    ParticleSpec("KR-0311", "olivine (Fo92) fragment", 57, OLIVINE_FO92, "xct"),
    ParticleSpec("KR-0312", "dolomite grain with matrix coating", 181, DOLOMITE, "weighed"),
]

#: particles taken through the whole correlative sequence, XCT to atom probe
CORRELATIVE = ("KR-0302", "KR-0305")
#: mount positions: the first six particles and the analogue standard on mount 01, the rest on 02
MOUNT_01, MOUNT_02 = "VPL-MNT-01", "VPL-MNT-02"

#: the sealed capsule the particles arrive in, and its seal
CAPSULE, CAPSULE_SEAL = "PEL-TC-07", "AMB-S-004417"
#: the vacuum transfer capsule that carries grid, coupon and witness coupon between laboratories
VACUUM_CAPSULE, VACUUM_CAPSULE_SEAL = "VPL-VTC-02", "VPL-S-20931"
CARRIER = "Tarnwell Express"
#: the three controls: procedural blank, terrestrial analogue standard, witness coupon
BLANK, ANALOGUE, WITNESS = "VPL-BLK-05", "STD-LZ-01", "VPL-WIT-03"

#: the study's contamination indicators: code, name, unit, baseline ± u, threshold kind and
#: value, where the baseline comes from (all invented for the demo)
INDICATORS = (
    ("particles-per-mm2", "Particles on the control surface", "particles/mm²", 1.8, 0.4,
     "k-sigma", 3.0,
     "series of six procedural blanks counted before the campaign"),
    ("surface-h-at-pct", "Hydrogen in the first 5 nm (APT)", "percent", 0.8, 0.2, "absolute", 1.5,
     "unirradiated lizardite standard, three needles"),
)
CONTROLS = (BLANK, ANALOGUE, WITNESS)
#: the TEM lift-out grid, the atom-probe needle coupon that travels, and the reserve coupon
#: of spare needles that stays at the first laboratory
GRID, COUPON, RESERVE_COUPON = "VPL-GRID-04", "VPL-CPN-12", "VPL-CPN-13"
#: the particle split into two fragments, and the one exposed to air (planted)
SPLIT, AIR_EXPOSED = "KR-0306", "KR-0309"
#: the spare needle logged at the atom probe while custody has it in the first lab (planted)
STRAY_NEEDLE = "KR-0305-N3"
