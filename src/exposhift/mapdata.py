"""The vendored map shapes, read from package data (``exposhift/data/maps``).

Both the dossier's map and the dashboard's maps draw countries from these files, so they work
offline from a checkout and from an installed wheel alike (``pyproject.toml`` lists
``data/maps/*`` as package data). Sources and licences: ``data/maps/README.md``.
"""

from __future__ import annotations

import functools
import json
from importlib import resources

SHAPES = "countries-110m.geojson"
POINTS = "country_points.json"


def _read(name: str) -> str:
    return resources.files("exposhift").joinpath("data", "maps", name).read_text(encoding="utf-8")


@functools.lru_cache(maxsize=1)
def country_shapes() -> dict:
    """Natural Earth 1:110m countries as GeoJSON, ``id`` = ISO 3166-1 alpha-3."""
    return json.loads(_read(SHAPES))


@functools.lru_cache(maxsize=1)
def country_points() -> dict[str, list]:
    """Alpha-3 code -> [longitude, latitude, name]: a point inside the country's largest
    polygon (where an event marker goes)."""
    return json.loads(_read(POINTS))
