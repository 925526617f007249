"""Writing a ``FeatureMap``: JSON, GeoJSON (RFC 7946) and a CSV of point labels.

Every file goes through ``lookup.atomic.atomic_path``: written in full or not
at all.  GeoJSON, per significant feature:

* 2D loop: a ``Polygon`` (the hole at its most stable radius), a ``Polygon``
  of its largest empty disk (a 128-gon inscribed in the circle) and a
  ``MultiPoint`` (the points on its boundary cycle);
* 2D cluster: a ``MultiPoint`` (its members) and, with three or more points
  not on a line, a ``Polygon`` (their convex hull);
* 3D: a ``MultiPoint`` with three coordinates per position and the
  feature's bounding box in the ``bbox`` member ([xmin, ymin, zmin, xmax,
  ymax, zmax]); a loop also as a closed ``LineString`` (its representative
  cycle, three coordinates per position).

Coordinates are the data's own: overlaying them on a map in a geographic
system is right only if the points were in that system.
"""
from __future__ import annotations

import csv
import json

import numpy as np

from ..atomic import atomic_path

__all__ = ["geojson", "write_json", "write_geojson", "write_labels"]


def _props(f) -> dict:
    d = f.as_dict(points=False)
    for k in ("polygon", "bbox", "centre", "cycle", "largest_empty_disk"):
        d.pop(k, None)
    d["centre"] = [float(c) for c in f.centre]
    return d


def geojson(res) -> dict:
    """The significant features of ``res`` as a GeoJSON FeatureCollection."""
    out = []
    for f in res.significant:
        pts = res.points[f.points]
        mp = {"type": "MultiPoint", "coordinates": [[float(c) for c in p] for p in pts]}
        props = _props(f)
        if res.dim == 2:
            if f.polygon is not None and len(f.polygon) >= 4:
                out.append({"type": "Feature", "id": f"{f.id}-region",
                            "geometry": {"type": "Polygon", "coordinates": [f.polygon]},
                            "properties": dict(props, role="hole" if f.dim else "hull")})
            if f.core is not None:
                t = np.linspace(0.0, 2.0 * np.pi, 129)            # counter-clockwise, closed
                cx, cy, rad = f.core
                disk = [[float(cx + rad * np.cos(a)), float(cy + rad * np.sin(a))] for a in t]
                disk[-1] = disk[0]
                out.append({"type": "Feature", "id": f"{f.id}-core",
                            "geometry": {"type": "Polygon", "coordinates": [disk]},
                            "properties": dict(props, role="largest empty disk")})
            out.append({"type": "Feature", "id": f"{f.id}-points", "geometry": mp,
                        "properties": dict(props, role="boundary points" if f.dim else "members")})
        else:
            role = {0: "members", 1: "cycle points", 2: "bounding points"}[f.dim]
            if f.cycle is not None:
                line = [[float(c) for c in res.points[i]] for i in [*f.cycle, f.cycle[0]]]
                out.append({"type": "Feature", "id": f"{f.id}-cycle",
                            "geometry": {"type": "LineString", "coordinates": line},
                            "bbox": [float(b) for b in f.bbox],
                            "properties": dict(props, role="cycle")})
            out.append({"type": "Feature", "id": f"{f.id}-points", "geometry": mp,
                        "bbox": [float(b) for b in f.bbox],
                        "properties": dict(props, role=role)})
    return {"type": "FeatureCollection", "features": out}


def _dump(obj, path: str) -> str:
    with atomic_path(path) as tmp:
        with open(tmp, "w", encoding="utf-8") as fh:
            json.dump(obj, fh, indent=1, allow_nan=False)
            fh.write("\n")
    return path


def write_json(res, path: str) -> str:
    """``res.as_dict()`` as JSON, atomically."""
    return _dump(res.as_dict(), path)


def write_geojson(res, path: str) -> str:
    """:func:`geojson` of ``res``, atomically."""
    return _dump(geojson(res), path)


def write_labels(res, path: str) -> str:
    """One CSV row per point: index, coordinates, the first significant
    feature it belongs to (empty: none) and all of them, ';'-separated."""
    names = ["x", "y", "z"][: res.dim]
    with atomic_path(path) as tmp:
        with open(tmp, "w", newline="", encoding="utf-8") as fh:
            w = csv.writer(fh)
            w.writerow(["index", *names, "feature", "features"])
            for i, (p, lab) in enumerate(zip(res.points, res.labels())):
                w.writerow([i, *[repr(float(c)) for c in p], lab[0] if lab else "", ";".join(lab)])
    return path
