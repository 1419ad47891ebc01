"""Rebuild the vendored country shapes from the ``world-atlas`` npm package (Natural Earth).

Usage (needs the package tarball, e.g. ``cd /tmp && npm pack world-atlas@2``)::

    python app/static/make_countries.py /tmp/package

Writes, next to this file:

- ``countries-110m.geojson``: Natural Earth 1:110m country outlines as a GeoJSON
  FeatureCollection; ``id`` is the ISO 3166-1 alpha-3 code (numeric ids of world-atlas mapped
  with pycountry; Kosovo gets the user-assigned ``XKX``; the two features without any code keep
  their name as ``id``). Coordinates are rounded to 2 decimals (about 1 km), which is finer than
  the 1:110m source. Ring order is kept as TopoJSON gives it (the order d3-geo and plotly.js
  expect).
- ``world_110m.json``: the same 1:110m topology (objects ``countries`` with alpha-3 ids and
  ``land``), named as plotly.js names its world base map. The app points plotly's
  ``topojsonURL`` config at ``app/static/`` (served by Streamlit's static file serving), so
  plotly.js never asks its CDN for a base map; the app keeps plotly's own base layers off and
  draws countries from ``countries-110m.geojson``.
- ``country_points.json``: alpha-3 -> [longitude, latitude, name], a point inside the largest
  polygon of each country, used to place event markers: from the drawn 1:110m shapes, and from
  the 1:50m file for the small countries missing at 1:110m.

The TopoJSON decoding follows the TopoJSON format specification (arcs delta-encoded and
quantised by ``transform``; a negative arc index ``~i`` is arc ``i`` reversed).
"""

from __future__ import annotations

import json
import sys
from pathlib import Path

import pycountry

HERE = Path(__file__).resolve().parent
#: outlines and marker points are package data (the dossier reads them from an installed wheel)
PACKAGE_MAPS = HERE.parents[1] / "src" / "exposhift" / "data" / "maps"
SPECIAL = {"Kosovo": "XKX"}


def _arcs(topo: dict) -> list[list[tuple[float, float]]]:
    (sx, sy), (tx, ty) = topo["transform"]["scale"], topo["transform"]["translate"]
    out = []
    for arc in topo["arcs"]:
        x = y = 0
        pts = []
        for dx, dy in arc:
            x += dx
            y += dy
            pts.append((x * sx + tx, y * sy + ty))
        out.append(pts)
    return out


def _ring(indices: list[int], arcs) -> list[tuple[float, float]]:
    ring: list[tuple[float, float]] = []
    for i in indices:
        pts = arcs[i] if i >= 0 else arcs[~i][::-1]
        ring.extend(pts if not ring else pts[1:])
    return ring


def _polygons(geom: dict, arcs) -> list[list[list[tuple[float, float]]]]:
    if geom["type"] == "Polygon":
        return [[_ring(r, arcs) for r in geom["arcs"]]]
    if geom["type"] == "MultiPolygon":
        return [[_ring(r, arcs) for r in poly] for poly in geom["arcs"]]
    return []


def _alpha3(geom: dict) -> str:
    gid, name = geom.get("id"), geom.get("properties", {}).get("name", "")
    if name in SPECIAL:
        return SPECIAL[name]
    if gid and gid.isdigit():
        c = pycountry.countries.get(numeric=gid.zfill(3))
        if c is not None:
            return c.alpha_3
    return name


def _area_centroid(ring) -> tuple[float, float, float]:
    """Signed area and centroid of a planar polygon ring (shoelace formula)."""
    a = cx = cy = 0.0
    for (x0, y0), (x1, y1) in zip(ring, ring[1:], strict=False):
        cross = x0 * y1 - x1 * y0
        a += cross
        cx += (x0 + x1) * cross
        cy += (y0 + y1) * cross
    if a == 0:
        xs, ys = zip(*ring, strict=True)
        return 0.0, sum(xs) / len(xs), sum(ys) / len(ys)
    return a / 2, cx / (3 * a), cy / (3 * a)


def shapes(topo: dict) -> dict:
    arcs = _arcs(topo)
    features = []
    for geom in topo["objects"]["countries"]["geometries"]:
        polys = _polygons(geom, arcs)
        if not polys:
            continue
        coords = [
            [[[round(x, 2), round(y, 2)] for x, y in ring] for ring in poly] for poly in polys
        ]
        features.append(
            {
                "type": "Feature",
                "id": _alpha3(geom),
                "properties": {"name": geom.get("properties", {}).get("name", "")},
                "geometry": {"type": "MultiPolygon", "coordinates": coords},
            }
        )
    return {"type": "FeatureCollection", "features": features}


def _inside(x: float, y: float, ring) -> bool:
    """Even-odd ray casting: is (x, y) inside the closed ring?"""
    inside = False
    for (x0, y0), (x1, y1) in zip(ring, ring[1:] + ring[:1], strict=True):
        if (y0 > y) != (y1 > y) and x < (x1 - x0) * (y - y0) / (y1 - y0) + x0:
            inside = not inside
    return inside


def _in_polygon(x: float, y: float, poly) -> bool:
    return _inside(x, y, poly[0]) and not any(_inside(x, y, hole) for hole in poly[1:])


def interior_point(poly) -> tuple[float, float]:
    """A point inside a polygon (outer ring + holes): its area centroid when that lies inside,
    else the middle of the widest inside stretch along 41 horizontal lines across it. A polygon
    cut at the antimeridian (longitudes spanning more than 180 degrees) is first unwrapped to
    0-360 so that it is one planar shape."""
    xs = [x for ring in poly for x, _ in ring]
    if max(xs) - min(xs) > 180:
        poly = [[(x + 360.0 if x < 0 else x, y) for x, y in ring] for ring in poly]
    _, cx, cy = _area_centroid(poly[0])
    if _in_polygon(cx, cy, poly):
        return cx, cy
    ys = [pt[1] for pt in poly[0]]
    best, point = -1.0, (cx, cy)
    for i in range(1, 42):
        y = min(ys) + (max(ys) - min(ys)) * i / 42
        xs = sorted(
            x0 + (x1 - x0) * (y - y0) / (y1 - y0)
            for ring in poly
            for (x0, y0), (x1, y1) in zip(ring, ring[1:] + ring[:1], strict=True)
            if (y0 > y) != (y1 > y)
        )
        for a, b in zip(xs[::2], xs[1::2], strict=False):
            if b - a > best and _in_polygon((a + b) / 2, y, poly):
                best, point = b - a, ((a + b) / 2, y)
    return point


def points(topo: dict, *, prefer: dict | None = None) -> dict:
    """alpha-3 -> [lon, lat, name] for every country of ``topo``: a point inside its largest
    polygon. Several features with one code (e.g. Australia and its islets share a numeric
    code) keep the largest. Countries in ``prefer`` (the drawn 1:110m shapes) take their point
    from there, so the marker lies inside the outline shown."""
    best = {**largest_polygons(topo), **(prefer or {})}
    out = {}
    for code, (_, poly, name) in best.items():
        x, y = interior_point(poly)
        out[code] = [round((x + 180.0) % 360.0 - 180.0, 2), round(y, 2), name]
    return dict(sorted(out.items()))


def largest_polygons(topo: dict) -> dict:
    """alpha-3 -> (area, largest polygon, name) of ``topo``."""
    arcs = _arcs(topo)
    out: dict[str, tuple[float, list, str]] = {}
    for geom in topo["objects"]["countries"]["geometries"]:
        code = _alpha3(geom)
        polys = _polygons(geom, arcs)
        if not polys or len(code) != 3:
            continue
        poly = max(polys, key=lambda q: abs(_area_centroid(q[0])[0]))
        area = abs(_area_centroid(poly[0])[0])
        if code not in out or area > out[code][0]:
            out[code] = (area, poly, geom.get("properties", {}).get("name", ""))
    return out


def plotly_topology(topo: dict) -> dict:
    """The world-atlas topology with alpha-3 ids, as plotly.js loads ``world_110m.json``."""
    out = json.loads(json.dumps(topo))
    for geom in out["objects"]["countries"]["geometries"]:
        geom["id"] = _alpha3(geom)
    return out


def main(package_dir: str) -> None:
    src = Path(package_dir)
    small = json.loads((src / "countries-110m.json").read_text())
    medium = json.loads((src / "countries-50m.json").read_text())
    (PACKAGE_MAPS / "countries-110m.geojson").write_text(
        json.dumps(shapes(small), separators=(",", ":"))
    )
    (HERE / "world_110m.json").write_text(json.dumps(plotly_topology(small), separators=(",", ":")))
    (PACKAGE_MAPS / "country_points.json").write_text(
        json.dumps(points(medium, prefer=largest_polygons(small)), separators=(",", ":"))
    )


if __name__ == "__main__":
    main(sys.argv[1] if len(sys.argv) > 1 else "package")
