"""The vendored map shapes, read from package data (``exposhift/data/maps``).

Both the dossier's map and the dashboard's maps draw countries from these files, so they work
offline from a checkout and from an installed wheel alike (``pyproject.toml`` lists
``data/maps/*`` as package data). Sources and licences: ``data/maps/README.md``.
"""

from __future__ import annotations

import functools
import json
from importlib import resources

import numpy as np

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


# ----------------------------------------------------------------------------- marker places
def _rings(code: str) -> list[list[list[float]]]:
    """Outer rings of the country's polygons, largest first (by bounding-box area)."""
    for f in country_shapes()["features"]:
        if f["id"] == code:
            g = f["geometry"]
            polys = [g["coordinates"]] if g["type"] == "Polygon" else g["coordinates"]
            rings = [p[0] for p in polys]

            def box(r):
                xs, ys = [p[0] for p in r], [p[1] for p in r]
                return (max(xs) - min(xs)) * (max(ys) - min(ys))

            return sorted(rings, key=box, reverse=True)
    return []


def inside(ring: list[list[float]], x: float, y: float) -> bool:
    """Point in polygon by ray casting (even-odd rule; Shimrat 1962, Comm ACM 5:434)."""
    hit = False
    n = len(ring)
    for i in range(n):
        x1, y1 = ring[i][0], ring[i][1]
        x2, y2 = ring[(i + 1) % n][0], ring[(i + 1) % n][1]
        if (y1 > y) != (y2 > y) and x < (x2 - x1) * (y - y1) / (y2 - y1) + x1:
            hit = not hit
    return hit


def inside_many(ring: list[list[float]], x: np.ndarray, y: np.ndarray) -> np.ndarray:
    """:func:`inside` for arrays of points at once (the same even-odd rule, vectorised)."""
    r = np.asarray(ring, dtype=float)
    x1, y1 = r[:, 0], r[:, 1]
    x2, y2 = np.roll(x1, -1), np.roll(y1, -1)
    px, py = np.asarray(x, dtype=float)[:, None], np.asarray(y, dtype=float)[:, None]
    straddles = (y1 > py) != (y2 > py)
    with np.errstate(divide="ignore", invalid="ignore"):
        cross = px < (x2 - x1) * (py - y1) / (y2 - y1) + x1
    return ((straddles & cross).sum(axis=1) % 2) == 1


def in_country(code: str, x: float, y: float) -> bool:
    """True when (longitude ``x``, latitude ``y``) lies inside one of the country's outlines."""
    return any(inside(r, x, y) for r in _rings(code))


@functools.lru_cache(maxsize=4096)
def marker_places(code: str, n: int, margin: float = 0.35) -> tuple[tuple[float, float], ...]:
    """``n`` distinct (longitude, latitude) places for the markers of one country's events,
    each inside the country's largest outline and at least ``margin`` degrees from its edge
    (tested at four points around it), spread apart by farthest-point sampling from the
    country's marker point (Gonzalez 1985, Theor Comput Sci 38:293). A country too small for
    ``n`` such places gets its marker point ``n`` times (the markers are then stacked, and the
    map labels the country with its number of events)."""
    base = country_points().get(code)
    if base is None:
        return ()
    home = (float(base[0]), float(base[1]))
    rings = _rings(code)
    if n <= 1 or not rings:
        return (home,) * max(n, 0)
    ring = rings[0]
    xs, ys = [p[0] for p in ring], [p[1] for p in ring]
    step = max((max(xs) - min(xs)) / 24, (max(ys) - min(ys)) / 24, 0.05)
    gx = np.arange(min(xs) + step / 2, max(xs), step)
    gy = np.arange(min(ys) + step / 2, max(ys), step)
    px, py = (a.ravel() for a in np.meshgrid(gx, gy, indexing="xy"))
    ok = np.ones(px.size, dtype=bool)
    for dx, dy in ((0, 0), (margin, 0), (-margin, 0), (0, margin), (0, -margin)):
        ok &= inside_many(ring, px + dx, py + dy)
    order = np.lexsort((px[ok], py[ok]))  # row by row, south to north, as the grid runs
    cands = [
        (round(float(x), 3), round(float(y), 3))
        for x, y in zip(px[ok][order], py[ok][order], strict=True)
    ]
    if len(cands) < n:
        return (home,) * n
    start = home if inside(ring, *home) else cands[0]
    chosen = [min(cands, key=lambda c: (c[0] - start[0]) ** 2 + (c[1] - start[1]) ** 2)]
    dist = [(c[0] - chosen[0][0]) ** 2 + (c[1] - chosen[0][1]) ** 2 for c in cands]
    while len(chosen) < n:
        i = max(range(len(cands)), key=dist.__getitem__)
        chosen.append(cands[i])
        dist = [
            min(d, (c[0] - cands[i][0]) ** 2 + (c[1] - cands[i][1]) ** 2)
            for d, c in zip(dist, cands, strict=True)
        ]
    return tuple(sorted(chosen, key=lambda c: (-c[1], c[0])))  # north to south, west to east
