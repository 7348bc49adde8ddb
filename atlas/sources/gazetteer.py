"""The gazetteer: places as CSV (``id,name,lat,lon`` …) or GeoJSON (RFC 7946).

Columns of other people's tables are mapped with ``[columns] gazetteer = {id = "ID", …}``.
Coordinates are converted once, here: a value that is not a number, or lies outside
-90..90 (latitude) or -180..180 (longitude), is an input problem with its file and line; an
empty pair means "no coordinates" and is allowed (the object is listed under the map).
"""

from __future__ import annotations

import csv
import io
import json
import math
import re
from dataclasses import dataclass, field
from pathlib import Path

from ..config import ACCESS_LEVELS
from ..errors import Problems, did_you_mean
from .text import read_text

PRECISIONS = ("exact", "generalised", "withheld")
KEYS = ("id", "name", "lat", "lon", "precision", "access")


@dataclass(frozen=True)
class Place:
    id: str
    name: str
    lat: float | None
    lon: float | None
    precision: str = "exact"
    access: str = "public"
    names: dict[str, str] = field(default_factory=dict)  # language -> localised name
    polygon: tuple[tuple[tuple[float, float], ...], ...] = ()  # rings of (lon, lat)
    file: str = ""
    line: int | None = None

    @property
    def has_coordinates(self) -> bool:
        return self.lat is not None and self.lon is not None


def read_gazetteer(path: Path, shown: str, problems: Problems,
                   columns: dict[str, str] | None = None) -> list[Place]:
    text = read_text(path, problems, shown)
    if text is None:
        return []
    if path.suffix.lower() in (".geojson", ".json") or text.lstrip().startswith("{"):
        return _read_geojson(text, shown, problems)
    return _read_csv(text, shown, problems, columns or {})


def _coordinate(value: str, low: float, high: float, what: str, shown: str, line: int,
                problems: Problems) -> float | None:
    value = value.strip()
    if value == "":
        return None
    try:
        number = float(value)
    except ValueError:
        problems.error(shown, line, f"{what} {value!r} is not a number")
        return None
    if not math.isfinite(number) or not low <= number <= high:
        problems.error(shown, line, f"{what} {value} is outside {low:g}..{high:g}")
        return None
    return number


def _common(record: dict[str, str], shown: str, line: int, problems: Problems,
            names: dict[str, str]) -> dict | None:
    pid = (record.get("id") or "").strip()
    if not pid:
        problems.error(shown, line, "a place has no id")
        return None
    precision = (record.get("precision") or "exact").strip() or "exact"
    if precision not in PRECISIONS:
        problems.error(shown, line, f"precision {precision!r} of place {pid!r} is not one of "
                       + ", ".join(PRECISIONS), did_you_mean(precision, PRECISIONS))
        precision = "withheld"
    access = (record.get("access") or "public").strip() or "public"
    if access not in ACCESS_LEVELS:
        problems.error(shown, line, f"access {access!r} of place {pid!r} is not one of "
                       + ", ".join(ACCESS_LEVELS), did_you_mean(access, ACCESS_LEVELS))
        access = "restricted"
    return dict(id=pid, name=(record.get("name") or pid).strip() or pid, precision=precision,
                access=access, names=names, file=shown, line=line)


def _read_csv(text: str, shown: str, problems: Problems, columns: dict[str, str]) -> list[Place]:
    reader = csv.DictReader(io.StringIO(text))
    header = reader.fieldnames or []
    ours = {key: columns.get(key, key) for key in KEYS}
    missing = [key for key in ("id", "lat", "lon") if ours[key] not in header]
    for key in missing:
        hint = did_you_mean(ours[key], header) or "columns: " + ", ".join(header)
        problems.error(shown, 1, f"has no column {ours[key]!r} (for {key})", hint)
    if missing:  # (problems from other files must not stop this one being read)
        return []
    places: list[Place] = []
    seen: dict[str, int] = {}
    start = 1
    try:
        for row in reader:
            line = start + 1
            start = reader.line_num
            if None in row:
                problems.error(shown, line, "has more cells than the header has columns")
                continue
            record = {key: (row.get(col) or "") for key, col in ours.items()}
            localised = {
                col.split("@", 1)[1]: (row.get(col) or "").strip()
                for col in header if "@" in col and (row.get(col) or "").strip()
            }
            common = _common(record, shown, line, problems, localised)
            if common is None:
                continue
            if common["id"] in seen:
                problems.error(shown, line, f"place {common['id']!r} is listed twice "
                               f"(first at line {seen[common['id']]})")
                continue
            seen[common["id"]] = line
            lat = _coordinate(record["lat"], -90, 90, "latitude", shown, line, problems)
            lon = _coordinate(record["lon"], -180, 180, "longitude", shown, line, problems)
            if (lat is None) != (lon is None):
                problems.error(shown, line, f"place {common['id']!r} has only one coordinate")
                lat = lon = None
            places.append(Place(lat=lat, lon=lon, **common))
    except csv.Error as exc:
        problems.error(shown, reader.line_num, f"is not readable CSV: {exc}")
    return places


def _read_geojson(text: str, shown: str, problems: Problems) -> list[Place]:
    try:
        data = json.loads(text)
    except json.JSONDecodeError as exc:
        problems.error(shown, exc.lineno, f"is not valid JSON: {exc.msg}")
        return []
    if not isinstance(data, dict) or data.get("type") != "FeatureCollection" \
            or not isinstance(data.get("features"), list):
        problems.error(shown, 1, "must be a GeoJSON FeatureCollection")
        return []
    places: list[Place] = []
    seen: set[str] = set()
    # The line each feature starts on, for messages: the n-th `"type": "Feature"` in the text
    # (given up on when a property also says "Feature" and the counts differ).
    starts = [text.count("\n", 0, m.start()) + 1
              for m in re.finditer(r'"type"\s*:\s*"Feature"', text)]
    if len(starts) != len(data["features"]):
        starts = [None] * len(data["features"])
    for n, feature in enumerate(data["features"], 1):
        where = f"feature {n}"
        line = starts[n - 1]
        props = feature.get("properties") if isinstance(feature, dict) else None
        geometry = feature.get("geometry") if isinstance(feature, dict) else None
        if not isinstance(props, dict):
            problems.error(shown, line, f"{where} has no properties")
            continue
        record = {k: str(props[k]) if props.get(k) is not None else "" for k in KEYS}
        if not record["id"] and feature.get("id") is not None:
            record["id"] = str(feature["id"])
        localised = {k.split("@", 1)[1]: str(v) for k, v in props.items()
                     if isinstance(k, str) and "@" in k and v}
        common = _common(record, shown, line, problems, localised)
        if common is None:
            continue
        if common["id"] in seen:
            problems.error(shown, line, f"place {common['id']!r} is listed twice")
            continue
        seen.add(common["id"])
        lat = lon = None
        polygon: tuple = ()
        kind = geometry.get("type") if isinstance(geometry, dict) else None
        coords = geometry.get("coordinates") if isinstance(geometry, dict) else None
        try:
            if kind == "Point":
                lon, lat = _position(coords)
            elif kind == "Polygon":
                polygon = tuple(tuple(_position(p) for p in ring) for ring in coords)
                lon, lat = _ring_centroid(polygon[0])
            elif geometry is not None:
                problems.error(shown, line, f"{where} ({common['id']}): geometry {kind!r} is not "
                               "a Point or Polygon")
        except (TypeError, ValueError, IndexError) as exc:
            problems.error(shown, line, f"{where} ({common['id']}): {exc}")
            continue
        places.append(Place(lat=lat, lon=lon, polygon=polygon, **common))
    return places


def _position(value) -> tuple[float, float]:
    if not isinstance(value, list) or len(value) < 2 or not all(
        isinstance(v, (int, float)) and not isinstance(v, bool) for v in value[:2]
    ):
        raise ValueError(f"coordinates {value!r} are not [longitude, latitude]")
    lon, lat = float(value[0]), float(value[1])
    if not (-180 <= lon <= 180 and -90 <= lat <= 90):
        raise ValueError(f"coordinates [{lon}, {lat}] are outside the globe")
    return lon, lat


def _ring_centroid(ring) -> tuple[float, float]:
    """Area-weighted centroid of a ring in plane lon/lat (adequate for a label point)."""
    a = cx = cy = 0.0
    for (x0, y0), (x1, y1) in zip(ring, ring[1:]):
        cross = x0 * y1 - x1 * y0
        a += cross
        cx += (x0 + x1) * cross
        cy += (y0 + y1) * cross
    if abs(a) < 1e-12:
        xs, ys = zip(*ring)
        return sum(xs) / len(xs), sum(ys) / len(ys)
    return cx / (3 * a), cy / (3 * a)
