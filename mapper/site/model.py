"""Dataclasses describing a site. All coordinates are site metres."""

from __future__ import annotations

from dataclasses import dataclass, field

import shapely
from shapely.geometry.base import BaseGeometry

from mapper.site.georef import Georef

#: Asset kinds that hold ESD-sensitive items unless the site file says otherwise.
SENSITIVE_KINDS = frozenset({"workstation", "bench", "sensitive"})
#: Asset kinds a person cannot stand on; planned points inside them are dropped.
BLOCKING_KINDS = frozenset({"rack", "machine", "wall", "pillar", "column", "obstacle", "tank"})


@dataclass(frozen=True)
class Asset:
    """Something on the site: a conveyor, a workstation, a rack, a door.

    Attributes
    ----------
    name : str
        Label shown on maps and in tables.
    kind : str
        Free word; ``workstation`` marks ESD-sensitive work, see :data:`SENSITIVE_KINDS`.
    geometry : shapely geometry
        Position in site metres.
    sensitive : bool
        Whether ESD-sensitive items are handled there (keep-away checks apply).
    walkable : bool
        Whether planned points may fall inside it (polygons only).
    height_m : float or None
        Height above the floor of where it may carry charge (a belt, a film carriage), metres;
        None when unknown (the physical field model then fits it within bounds).
    """

    name: str
    kind: str
    geometry: BaseGeometry
    sensitive: bool = False
    walkable: bool = True
    height_m: float | None = None


@dataclass(frozen=True)
class Zone:
    """An area with its own limit, e.g. an ESD protected area.

    Attributes
    ----------
    name : str
        Label.
    geometry : shapely Polygon or MultiPolygon
        Extent in site metres.
    limit_v_per_m : float or None
        Action level inside the zone, V/m; ``None`` uses the survey's threshold.
    kind : str
        Free word, e.g. ``EPA``.
    """

    name: str
    geometry: BaseGeometry
    limit_v_per_m: float | None = None
    kind: str = "zone"


@dataclass(frozen=True)
class ControlPoint:
    """A site position whose WGS 84 longitude and latitude are known.

    Attributes
    ----------
    x, y : float
        Site coordinates, metres.
    lon, lat : float
        WGS 84 longitude and latitude, degrees.
    """

    x: float
    y: float
    lon: float
    lat: float


@dataclass(frozen=True)
class Site:
    """A surveyed site in site metres.

    Attributes
    ----------
    name : str
        Site name.
    outline : shapely Polygon
        Boundary of the surveyed area, metres.
    assets, zones : tuple
        Assets and zones inside (or near) the outline.
    control_points : tuple of ControlPoint
        Georeference, may be empty.
    crs : str or None
        Projected CRS named in the site file.
    georef : Georef or None
        Fitted transform from site metres to ``georef.crs``; ``None`` for a local site.
    warnings : tuple of str
        Non-fatal findings made while loading (assets outside, high georeference RMS).
    source : str
        File the site came from.
    """

    name: str
    outline: BaseGeometry
    assets: tuple[Asset, ...] = ()
    zones: tuple[Zone, ...] = ()
    control_points: tuple[ControlPoint, ...] = ()
    crs: str | None = None
    georef: Georef | None = None
    warnings: tuple[str, ...] = field(default=(), compare=False)
    source: str = field(default="", compare=False)
    timezone: str | None = None

    @property
    def area_m2(self) -> float:
        """Area of the outline, square metres."""
        return float(self.outline.area)

    @property
    def is_georeferenced(self) -> bool:
        """True when the site can be placed in a projected CRS."""
        return self.georef is not None

    def to_dict(self) -> dict:
        """A JSON-ready description (metres, WKT) that :meth:`from_dict` reads back."""
        return {
            "name": self.name,
            "outline": self.outline.wkt,
            "crs": self.crs,
            "assets": [
                {
                    "name": a.name,
                    "kind": a.kind,
                    "wkt": a.geometry.wkt,
                    "sensitive": a.sensitive,
                    "walkable": a.walkable,
                    "height_m": a.height_m,
                }
                for a in self.assets
            ],
            "zones": [
                {"name": z.name, "wkt": z.geometry.wkt, "limit_v_per_m": z.limit_v_per_m, "kind": z.kind}
                for z in self.zones
            ],
            "control_points": [
                {"x": c.x, "y": c.y, "lon": c.lon, "lat": c.lat} for c in self.control_points
            ],
            "georef": self.georef.to_dict() if self.georef else None,
            "source": self.source,
            "timezone": self.timezone,
        }

    @classmethod
    def from_dict(cls, data: dict) -> Site:
        """Rebuild a site from :meth:`to_dict` output."""
        return cls(
            name=data["name"],
            outline=shapely.from_wkt(data["outline"]),
            assets=tuple(
                Asset(a["name"], a["kind"], shapely.from_wkt(a["wkt"]), a["sensitive"], a["walkable"],
                      a.get("height_m"))
                for a in data["assets"]
            ),
            zones=tuple(
                Zone(z["name"], shapely.from_wkt(z["wkt"]), z["limit_v_per_m"], z.get("kind", "zone"))
                for z in data["zones"]
            ),
            control_points=tuple(ControlPoint(**c) for c in data["control_points"]),
            crs=data.get("crs"),
            georef=Georef.from_dict(data["georef"]) if data.get("georef") else None,
            source=data.get("source", ""),
            timezone=data.get("timezone"),
        )
