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
  polygon of each country of the 1:50m file (which also has small countries missing at 1:110m),
  used to place event markers.

The TopoJSON decoding follows the TopoJSON format specification (arcs delta-encoded and
quantised by ``transform``; a negative arc index ``~i`` is arc ``i`` reversed).
"""

from __future__ import annotations

import json
import sys
from pathlib import Path

import pycountry

HERE = Path(__file__).resolve().parent
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
        coords = [[[[round(x, 2), round(y, 2)] for x, y in ring] for ring in poly]
                  for poly in polys]
        features.append({
            "type": "Feature", "id": _alpha3(geom),
            "properties": {"name": geom.get("properties", {}).get("name", "")},
            "geometry": {"type": "MultiPolygon", "coordinates": coords},
        })
    return {"type": "FeatureCollection", "features": features}


def points(topo: dict) -> dict:
    arcs = _arcs(topo)
    out = {}
    for geom in topo["objects"]["countries"]["geometries"]:
        code = _alpha3(geom)
        polys = _polygons(geom, arcs)
        if not polys or len(code) != 3:
            continue
        best = max((_area_centroid(p[0]) for p in polys), key=lambda t: abs(t[0]))
        out[code] = [round(best[1], 2), round(best[2], 2),
                     geom.get("properties", {}).get("name", "")]
    return dict(sorted(out.items()))


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
    (HERE / "countries-110m.geojson").write_text(
        json.dumps(shapes(small), separators=(",", ":")))
    (HERE / "world_110m.json").write_text(
        json.dumps(plotly_topology(small), separators=(",", ":")))
    (HERE / "country_points.json").write_text(
        json.dumps(points(medium), separators=(",", ":")))


if __name__ == "__main__":
    main(sys.argv[1] if len(sys.argv) > 1 else "package")
