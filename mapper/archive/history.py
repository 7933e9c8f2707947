"""A site's surveys over time: largest |E|, hotspot area per zone, hotspots followed across surveys.

Hotspots (site-wide, at the survey's action level) of consecutive surveys are matched by place
and nearest asset, same polarity only: two match when their outlines overlap, or when they have
the same nearest asset and lie within :data:`MATCH_GAP_M` of each other. Matches join hotspots
into *places* (a union over all consecutive pairs, so a split or merge stays one place). At each
survey a place is ``new`` (present now, not in the survey before), ``recurring`` (present in
both) or ``cleared`` (present before, not now). Zone pass/fail comes from the zone results the
push stored (each zone against its own limit, the readings counted as facts).
"""

from __future__ import annotations

from collections import Counter
from dataclasses import dataclass, field

import shapely
from shapely.geometry.base import BaseGeometry

from mapper.archive.connect import connect, describe
from mapper.archive.push import site_key
from mapper.archive.schema import SCHEMA, check
from mapper.errors import MapperError

#: Hotspots of one polarity near the same asset and at most this far apart (metres) are the same
#: place (common practice, no source: about one grid spacing of an indoor survey).
MATCH_GAP_M = 2.0
HISTORY_STATUSES = ("new", "recurring", "cleared")


@dataclass(frozen=True)
class HotspotEntry:
    """One hotspot of one survey, with the place it belongs to.

    Attributes
    ----------
    hotspot_id : str
        Id within its survey (``H1`` ...).
    place : str
        Place id (``P1`` ...), the same across the surveys it recurs in.
    status : str
        ``new`` or ``recurring``.
    polarity : str
        ``positive`` or ``negative``.
    area_m2 : float
        Area, square metres.
    peak_v_per_m : float
        Signed peak of the map, V/m.
    max_reading_v_per_m : float or None
        Largest |reading| inside, signed, V/m.
    nearest_asset : str or None
        Asset nearest to it.
    x_m, y_m : float
        Peak position, site metres.
    """

    hotspot_id: str
    place: str
    status: str
    polarity: str
    area_m2: float
    peak_v_per_m: float
    max_reading_v_per_m: float | None
    nearest_asset: str | None
    x_m: float
    y_m: float


@dataclass(frozen=True)
class ZoneState:
    """One zone in one survey.

    Attributes
    ----------
    zone : str
        Zone name.
    passed : bool or None
        Whether the zone met its limit; ``None`` when the survey has no zone result (no field).
    limit_v_per_m : float or None
        The zone's limit, V/m.
    worst_v_per_m : float or None
        Largest |E| inside (measured or mapped), signed, V/m.
    hotspot_area_m2 : float
        Hotspot area inside the zone (at the zone's limit), square metres.
    """

    zone: str
    passed: bool | None
    limit_v_per_m: float | None
    worst_v_per_m: float | None
    hotspot_area_m2: float


@dataclass(frozen=True)
class SurveyStep:
    """One survey of the site.

    Attributes
    ----------
    survey_id : int
        Archive id.
    started_utc : str or None
        First field reading, ISO 8601 UTC.
    max_abs_v_per_m : float or None
        Largest |E|, measured or mapped, V/m.
    max_abs_reading_v_per_m : float or None
        Largest |E| measured, V/m.
    threshold_v_per_m : float
        The survey's action level, V/m.
    hotspot_area_m2 : float
        Total site-wide hotspot area, square metres.
    zones : tuple of ZoneState
        Each zone.
    hotspots : tuple of HotspotEntry
        Hotspots present.
    cleared : tuple of str
        Places present in the survey before and not in this one.
    uid : str
        The survey's stable identity (:attr:`mapper.survey.content.SurveyContent.uid`).
    """

    survey_id: int
    started_utc: str | None
    max_abs_v_per_m: float | None
    max_abs_reading_v_per_m: float | None
    threshold_v_per_m: float
    hotspot_area_m2: float
    zones: tuple[ZoneState, ...]
    hotspots: tuple[HotspotEntry, ...]
    cleared: tuple[str, ...] = ()
    uid: str = ""

    def status_of(self, place: str) -> str | None:
        """``new``, ``recurring`` or ``cleared`` for a place at this survey, ``None`` if absent."""
        if place in self.cleared:
            return "cleared"
        found = [h.status for h in self.hotspots if h.place == place]
        return found[0] if found else None


@dataclass(frozen=True)
class Place:
    """A place where hotspots were found, followed over the surveys.

    Attributes
    ----------
    id : str
        ``P1``, ``P2`` ... in order of first appearance.
    polarity : str
        ``positive`` or ``negative``.
    nearest_asset : str or None
        The asset most often nearest to its hotspots.
    x_m, y_m : float
        Centre of its outlines, site metres.
    surveys : tuple of int
        Archive ids of the surveys it appears in.
    status : str
        At the latest survey: ``new``, ``recurring``, ``cleared`` (gone in the latest survey)
        or ``gone`` (cleared earlier).
    """

    id: str
    polarity: str
    nearest_asset: str | None
    x_m: float
    y_m: float
    surveys: tuple[int, ...]
    status: str


@dataclass(frozen=True)
class History:
    """A site's surveys in time order and the places of their hotspots."""

    site: str
    surveys: tuple[SurveyStep, ...]
    places: tuple[Place, ...] = field(default=())

    def to_dict(self) -> dict:
        """JSON-ready form (SI units, site metres)."""
        return {
            "site": self.site,
            "surveys": [
                {**{k: v for k, v in s.__dict__.items() if k not in ("zones", "hotspots", "cleared", "uid")},
                 "zones": [z.__dict__ for z in s.zones],
                 "hotspots": [h.__dict__ for h in s.hotspots],
                 "cleared": list(s.cleared)}
                for s in self.surveys
            ],
            "places": [{**p.__dict__, "surveys": list(p.surveys)} for p in self.places],
        }


@dataclass(frozen=True)
class _Spot:
    survey: int
    hotspot_id: str
    polarity: str
    area_m2: float
    peak: float
    max_reading: float | None
    asset: str | None
    x: float
    y: float
    geom: BaseGeometry


def same_place(a: _Spot, b: _Spot) -> bool:
    """Whether two hotspots of consecutive surveys are the same place (see the module docstring)."""
    if a.polarity != b.polarity:
        return False
    if a.geom.intersection(b.geom).area > 0.0:
        return True
    return a.asset is not None and a.asset == b.asset and a.geom.distance(b.geom) <= MATCH_GAP_M


def _places(order: list[int], spots: dict[int, list[_Spot]]) -> dict[tuple[int, str], int]:
    """Union of consecutive-survey matches: (survey, hotspot id) -> place number."""
    keys = [(s.survey, s.hotspot_id) for sid in order for s in spots.get(sid, [])]
    parent = {k: k for k in keys}

    def find(k):
        while parent[k] != k:
            parent[k] = parent[parent[k]]
            k = parent[k]
        return k

    for before, after in zip(order, order[1:], strict=False):
        for a in spots.get(before, []):
            for b in spots.get(after, []):
                if same_place(a, b):
                    parent[find((b.survey, b.hotspot_id))] = find((a.survey, a.hotspot_id))
    numbers: dict = {}
    out = {}
    for k in keys:  # numbered in order of first appearance
        root = find(k)
        numbers.setdefault(root, len(numbers) + 1)
        out[k] = numbers[root]
    return out


def site_history(url: str | None, site: str) -> History:
    """The history of one site (see the module docstring).

    Parameters
    ----------
    url : str or None
        Archive connection.
    site : str
        Site name (trimmed, case-insensitive).
    """
    where = describe(url)
    with connect(url, autocommit=True) as conn:
        with conn.transaction(), conn.cursor() as cur:
            cur.execute("SET TRANSACTION ISOLATION LEVEL REPEATABLE READ READ ONLY")
            check(cur, where)
            cur.execute(f"SELECT id, name FROM {SCHEMA}.sites WHERE name_key = %s", (site_key(site),))
            row = cur.fetchone()
            if row is None:
                raise MapperError(f"the archive holds no site named {site!r} (see 'mapper archive list')",
                                  where=where)
            site_id, site_name = row
            cur.execute(
                f"SELECT id, started_utc, max_abs_reading_v_per_m, max_abs_map_v_per_m, threshold_v_per_m, uid "
                f"FROM {SCHEMA}.surveys WHERE site_id = %s ORDER BY started_utc NULLS LAST, id", (site_id,))
            surveys = cur.fetchall()
            cur.execute(
                f"SELECT h.survey_id, h.scope, h.hotspot_id, h.polarity, h.area_m2, h.peak_v_per_m, "
                f"h.max_reading_v_per_m, h.nearest_asset, h.peak_x_m, h.peak_y_m, ST_AsBinary(h.geom_site) "
                f"FROM {SCHEMA}.hotspots h JOIN {SCHEMA}.surveys v ON v.id = h.survey_id "
                "WHERE v.site_id = %s ORDER BY h.survey_id, h.scope, h.hotspot_id", (site_id,))
            hotspot_rows = cur.fetchall()
            cur.execute(
                f"SELECT r.survey_id, r.zone, r.exceeded, r.limit_v_per_m, r.worst_v_per_m "
                f"FROM {SCHEMA}.zone_results r JOIN {SCHEMA}.surveys v ON v.id = r.survey_id "
                "WHERE v.site_id = %s", (site_id,))
            zone_rows = cur.fetchall()
            cur.execute(f"SELECT name, ST_AsBinary(geom_site) FROM {SCHEMA}.zones WHERE site_id = %s "
                        "ORDER BY ordinal", (site_id,))
            zones = [(n, shapely.from_wkb(bytes(g))) for n, g in cur.fetchall()]
    return _build(site_name, surveys, hotspot_rows, zone_rows, zones)


def _build(site_name, surveys, hotspot_rows, zone_rows, zones) -> History:
    order = [int(s[0]) for s in surveys]
    spots: dict[int, list[_Spot]] = {}
    scoped: dict[tuple[int, str], list[BaseGeometry]] = {}
    for sid, scope, hid, pol, area, peak, maxr, asset, x, y, wkb in hotspot_rows:
        geom = shapely.from_wkb(bytes(wkb))
        if scope:
            scoped.setdefault((int(sid), scope), []).append(geom)
            continue
        spots.setdefault(int(sid), []).append(_Spot(int(sid), hid, pol, float(area), float(peak),
                                                    maxr, asset, float(x), float(y), geom))
    place_of = _places(order, spots)
    results = {(int(r[0]), r[1]): r for r in zone_rows}
    steps: list[SurveyStep] = []
    previous: set[int] = set()
    members: dict[int, list[_Spot]] = {}
    for sid, started, max_reading, max_map, threshold, uid in surveys:
        sid = int(sid)
        present = {place_of[(s.survey, s.hotspot_id)] for s in spots.get(sid, [])}
        entries = []
        for s in spots.get(sid, []):
            number = place_of[(s.survey, s.hotspot_id)]
            members.setdefault(number, []).append(s)
            entries.append(HotspotEntry(s.hotspot_id, f"P{number}", "recurring" if number in previous else "new",
                                        s.polarity, s.area_m2, s.peak, s.max_reading, s.asset, s.x, s.y))
        cleared = tuple(f"P{n}" for n in sorted(previous - present))
        site_union = shapely.union_all([s.geom for s in spots.get(sid, [])]) if spots.get(sid) else None
        states = []
        for name, zgeom in zones:
            r = results.get((sid, name))
            own = scoped.get((sid, name))
            if own is not None or (r is not None and r[3] != threshold):
                area = float(shapely.union_all(own).intersection(zgeom).area) if own else 0.0
            else:
                area = float(site_union.intersection(zgeom).area) if site_union is not None else 0.0
            states.append(ZoneState(name, None if r is None else not r[2], None if r is None else r[3],
                                    None if r is None else r[4], area))
        values = [v for v in (max_reading, max_map) if v is not None]
        steps.append(SurveyStep(
            sid, None if started is None else started.isoformat(), max(values) if values else None,
            max_reading, float(threshold),
            float(site_union.area) if site_union is not None else 0.0, tuple(states), tuple(entries), cleared,
            uid))
        previous = present
    places = []
    for number in sorted(members):
        group = members[number]
        assets = Counter(s.asset for s in group if s.asset)
        centre = shapely.union_all([s.geom for s in group]).centroid
        seen = tuple(dict.fromkeys(s.survey for s in group))
        last = order[-1]
        if last in seen:
            status = "recurring" if len(order) > 1 and order[-2] in seen else "new"
        else:
            status = "cleared" if len(order) > 1 and order[-2] in seen else "gone"
        places.append(Place(f"P{number}", group[0].polarity, assets.most_common(1)[0][0] if assets else None,
                            float(centre.x), float(centre.y), seen, status))
    return History(site_name, tuple(steps), tuple(places))
