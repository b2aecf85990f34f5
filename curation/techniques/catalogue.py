"""The registry of techniques: adding a technique is adding one spec to a family module."""

from __future__ import annotations

import re

from curation.errors import InvalidInput
from curation.techniques import apt, electron, fib, preparation, xray
from curation.techniques.spec import Technique


def _register(*groups: tuple[Technique, ...]) -> dict[str, Technique]:
    """One dict keyed by code, refusing a code defined twice."""
    registry: dict[str, Technique] = {}
    for technique in (t for group in groups for t in group):
        if technique.code in registry:
            raise ValueError(f"technique code defined twice: {technique.code}")
        registry[technique.code] = technique
    return registry


#: every technique, in the order a station page lists them
TECHNIQUES: dict[str, Technique] = _register(
    xray.TECHNIQUES, electron.TECHNIQUES, fib.TECHNIQUES, apt.TECHNIQUES,
    preparation.TECHNIQUES,
)


def get(code: str) -> Technique:
    """The technique with this code; InvalidInput naming the code and the known ones."""
    technique = TECHNIQUES.get(code.strip().lower()) if isinstance(code, str) else None
    if technique is None:
        raise InvalidInput("technique", code, "one of " + ", ".join(TECHNIQUES))
    return technique


def families() -> list[str]:
    """The technique families, in catalogue order."""
    return list(dict.fromkeys(t.family for t in TECHNIQUES.values()))


def for_family(family: str) -> list[Technique]:
    """The techniques of one family ("fib" → trench, lift-out, ...)."""
    return [t for t in TECHNIQUES.values() if t.family == family.strip().lower()]


def for_instrument(techniques: str) -> list[Technique]:
    """The techniques an instrument runs, from its space- or comma-separated families or codes.

    Unknown words are skipped: the instrument record, not the station page, is where they are
    checked (see unknown_words).
    """
    words = set(_words(techniques))
    return [t for t in TECHNIQUES.values() if t.family in words or t.code in words]


def unknown_words(techniques: str) -> list[str]:
    """The words of an instrument's technique list that name no family and no technique."""
    known = set(families()) | set(TECHNIQUES)
    return [w for w in _words(techniques) if w not in known]


def _words(text: str) -> list[str]:
    """Lower-case words split on spaces and commas."""
    return [w for w in re.split(r"[\s,]+", text.strip().lower()) if w]
