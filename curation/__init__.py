"""curation: a provenance database for returned extraterrestrial particles."""

from __future__ import annotations

from collections.abc import Mapping
from typing import Any


def create_app(config: Mapping[str, Any] | None = None) -> Any:
    """The Flask application factory (defined in curation.web.app)."""
    from curation.web.app import build_app

    return build_app(config)
