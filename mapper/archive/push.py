"""Pushing one survey file into the archive, in one transaction.

A survey is known by :attr:`~mapper.survey.content.SurveyContent.uid` (its name, creation time,
site and first event, none of which ever change). A push

- of a survey the archive does not hold stores all of it: its site (once per site name, with
  zones and assets), plan, meta, meters, every reading row with its superseding history,
  condition notes, the event log, stored field models, and the products of
  :func:`~mapper.workflow.survey_products` (hotspots, sources, zone results, raster);
- of a survey whose content digest equals the archived one changes nothing, not even a time;
- of a survey that gained rows adds the new rows only, after checking that every archived row
  is still the same in the file; meta, meters and the derived products are brought up to date.

Everything is one SERIALIZABLE transaction (retried on a conflict with a concurrent push), so
a push that is killed or loses its connection leaves nothing half written. Pushes to one site
queue on an advisory lock on the site's name (held by the connection, so it dies with it), so
they follow one another rather than conflict; pushes to other sites run side by side.
"""

from __future__ import annotations

import hashlib
import json
from dataclasses import dataclass
from pathlib import Path

import numpy as np
import shapely
from shapely.geometry.base import BaseGeometry

from mapper.archive.connect import connect, describe, psycopg, run_transaction
from mapper.archive.schema import SCHEMA, check
from mapper.errors import MapperError
from mapper.export.crs import ExportCRS, export_crs
from mapper.features.sources import source_records
from mapper.field.storage import field_to_bytes
from mapper.site.model import Site
from mapper.survey.content import APPEND_ONLY, COLUMNS, SurveyContent, read_content
from mapper.survey.store import Survey
from mapper.workflow import Products, survey_products


@dataclass(frozen=True)
class PushResult:
    """What a push did.

    Attributes
    ----------
    survey_id : int
        The survey's id in the archive.
    status : str
        ``added`` (new survey), ``updated`` (new rows added) or ``unchanged``.
    added : dict
        Table name -> number of rows added.
    site : str
        Site name.
    site_added : bool
        Whether the site was new to the archive.
    """

    survey_id: int
    status: str
    added: dict
    site: str
    site_added: bool = False


def site_key(name: str) -> str:
    """The key sites are matched by: the name, trimmed, case-folded."""
    return name.strip().casefold()


def site_fingerprint(site: Site) -> str:
    """SHA-256 of what makes a site that site: outline, assets, zones, control points, CRS, georeference.

    The file it was loaded from and its load warnings are left out (they differ between machines).
    """
    data = site.to_dict()
    data.pop("source", None)
    return hashlib.sha256(json.dumps(data, sort_keys=True).encode("utf-8")).hexdigest()


class _Geo:
    """Geometries in site metres to hex EWKB: SRID 0 site metres and the real CRS."""

    def __init__(self, crs: ExportCRS, srid: int | None) -> None:
        self.crs = crs
        self.srid = srid if crs.georeferenced else None

    def site(self, geom: BaseGeometry) -> str:
        return shapely.to_wkb(geom, hex=True, include_srid=False)

    def real(self, geom: BaseGeometry) -> str | None:
        if self.srid is None:
            return None
        moved = shapely.set_srid(self.crs.geometry(geom), self.srid)
        return shapely.to_wkb(moved, hex=True, include_srid=True)

    def points(self, x: np.ndarray, y: np.ndarray) -> tuple[list[str], list[str | None]]:
        site = shapely.to_wkb(shapely.points(x, y), hex=True)
        if self.srid is None:
            return list(site), [None] * len(site)
        e, n = self.crs.points(x, y)
        real = shapely.to_wkb(shapely.set_srid(shapely.points(e, n), self.srid), hex=True, include_srid=True)
        return list(site), list(real)


def _srid(cur, crs: ExportCRS) -> int | None:
    """The PostGIS SRID of an export CRS (its EPSG code, when PostGIS knows it)."""
    if not crs.georeferenced:
        return None
    code = crs.crs.to_epsg()
    if code is None:
        return None
    cur.execute("SELECT srid FROM spatial_ref_sys WHERE auth_name = 'EPSG' AND auth_srid = %s", (code,))
    row = cur.fetchone()
    return int(row[0]) if row else None


def _copy(cur, table: str, cols: tuple[str, ...], rows) -> int:
    count = 0
    quoted = ", ".join(f'"{c}"' for c in cols)
    with cur.copy(f"COPY {SCHEMA}.{table} ({quoted}) FROM STDIN") as copy:
        for row in rows:
            copy.write_row(row)
            count += 1
    return count


def _rows_of(cur, table: str, survey_id: int) -> list[tuple]:
    cols = ", ".join(f'"{c}"' for c in COLUMNS[table])
    order = "walk_order" if table == "plan_points" else "id"
    cur.execute(f"SELECT {cols} FROM {SCHEMA}.{table} WHERE survey_id = %s ORDER BY {order}", (survey_id,))
    return [tuple(bytes(v) if isinstance(v, memoryview) else v for v in r) for r in cur.fetchall()]


def _same(a: tuple, b: tuple) -> bool:
    return len(a) == len(b) and all(x == y or (x is None and y is None) for x, y in zip(a, b, strict=True))


def _survey_times(content: SurveyContent) -> tuple[str | None, str | None]:
    cols = COLUMNS["readings"]
    kind, time = cols.index("kind"), cols.index("time_utc")
    times = sorted(r[time] for r in content.tables["readings"] if r[kind] == "field")
    if not times:
        created = content.meta_dict.get("created_utc")
        return created, created
    return times[0], times[-1]


def _insert_site(cur, site: Site, geo: _Geo) -> int:
    cur.execute(
        f"INSERT INTO {SCHEMA}.sites (name, name_key, fingerprint, site_json, crs, srid, outline_site, outline) "
        "VALUES (%s, %s, %s, %s, %s, %s, %s::geometry, %s::geometry) RETURNING id",
        (site.name, site_key(site.name), site_fingerprint(site), json.dumps(site.to_dict()),
         geo.crs.name if geo.crs.georeferenced else None, geo.srid, geo.site(site.outline),
         geo.real(site.outline)),
    )
    site_id = int(cur.fetchone()[0])
    for k, z in enumerate(site.zones):
        cur.execute(
            f"INSERT INTO {SCHEMA}.zones (site_id, ordinal, name, kind, limit_v_per_m, geom_site, geom) "
            "VALUES (%s, %s, %s, %s, %s, %s::geometry, %s::geometry)",
            (site_id, k, z.name, z.kind, z.limit_v_per_m, geo.site(z.geometry), geo.real(z.geometry)),
        )
    for k, a in enumerate(site.assets):
        cur.execute(
            f"INSERT INTO {SCHEMA}.assets (site_id, ordinal, name, kind, sensitive, walkable, height_m, "
            "geom_site, geom) VALUES (%s, %s, %s, %s, %s, %s, %s, %s::geometry, %s::geometry)",
            (site_id, k, a.name, a.kind, a.sensitive, a.walkable, a.height_m, geo.site(a.geometry),
             geo.real(a.geometry)),
        )
    return site_id


def _product_rows(products: Products, geo: _Geo) -> dict[str, list[tuple]]:
    out: dict[str, list[tuple]] = {"hotspots": [], "sources": [], "zone_results": [], "rasters": []}
    f = products.findings
    if f is not None:
        for scope, spots in (("", f.hotspots), (None, f.zone_hotspots)):
            for h in spots:
                out["hotspots"].append((
                    scope if scope is not None else (h.zone or ""), h.id, h.polarity, h.zone, list(h.zones),
                    h.threshold_v_per_m, h.peak_v_per_m, h.peak_x, h.peak_y, h.mean_v_per_m,
                    h.max_reading_v_per_m, h.status, h.p_exceed_max, h.nearest_asset, h.nearest_asset_m,
                    float(h.geometry.area), [int(i) for i in h.reading_ids], geo.site(h.geometry),
                    geo.real(h.geometry),
                ))
        for z in f.zone_results:
            out["zone_results"].append((
                z.zone, z.limit_v_per_m, z.limit_source, z.exceeded, z.worst_v_per_m, z.worst_from,
                z.worst_x, z.worst_y, z.excess_v_per_m, z.max_reading_v_per_m, z.n_readings,
            ))
    for s in source_records(products.grid, products.site):
        geom = shapely.from_wkt(s["wkt"])
        record = {k: v for k, v in s.items() if k != "geometry"}
        out["sources"].append((s["source_id"], json.dumps(record), geo.site(geom), geo.real(geom)))
    g = products.grid
    if g is not None:
        extent = shapely.box(float(np.min(g.x)), float(np.min(g.y)), float(np.max(g.x)), float(np.max(g.y)))
        out["rasters"].append((g.method, products.field_source, int(len(g.x)), int(len(g.y)),
                               field_to_bytes(g), geo.site(extent), geo.real(extent)))
    return out


_PRODUCT_COLUMNS = {
    "hotspots": ("scope", "hotspot_id", "polarity", "zone", "zones", "threshold_v_per_m", "peak_v_per_m",
                 "peak_x_m", "peak_y_m", "mean_v_per_m", "max_reading_v_per_m", "status", "p_exceed_max",
                 "nearest_asset", "nearest_asset_m", "area_m2", "reading_ids", "geom_site", "geom"),
    "sources": ("source_id", "record", "geom_site", "geom"),
    "zone_results": ("zone", "limit_v_per_m", "limit_source", "exceeded", "worst_v_per_m", "worst_from",
                     "worst_x_m", "worst_y_m", "excess_v_per_m", "max_reading_v_per_m", "n_readings"),
    "rasters": ("method", "source", "nx", "ny", "data", "extent_site", "extent"),
}


def _survey_stats(content: SurveyContent, products: Products) -> dict:
    field_values = [abs(r.value_v_per_m) for r in products.readings]
    grid = products.grid
    map_max = None
    if grid is not None and np.isfinite(grid.estimate).any():
        map_max = float(np.nanmax(np.abs(grid.estimate)))
    started, finished = _survey_times(content)
    return {
        "n_readings": len(content.tables["readings"]),
        "n_field": len(products.readings),
        "max_abs_reading_v_per_m": max(field_values) if field_values else None,
        "max_abs_map_v_per_m": map_max,
        "field_method": grid.method if grid is not None else None,
        "field_source": products.field_source or None,
        "no_field_reason": products.no_field_reason,
        "started_utc": started,
        "finished_utc": finished,
        "threshold_v_per_m": products.threshold_v_per_m,
        "display_unit": products.display_unit,
        "operator": products.operator,
    }


def _write_rows(cur, survey_id: int, table: str, rows, geo: _Geo) -> int:
    """Append file rows to an archive table (readings and plan points get their geometries)."""
    rows = list(rows)
    if not rows:
        return 0
    cols = COLUMNS[table]
    if table in ("readings", "plan_points"):
        ix, iy = cols.index("x_m"), cols.index("y_m")
        x = np.array([r[ix] for r in rows], dtype=float)
        y = np.array([r[iy] for r in rows], dtype=float)
        site_g, real_g = geo.points(x, y)
        data = ((survey_id, *r, s, g) for r, s, g in zip(rows, site_g, real_g, strict=True))
        return _copy(cur, table, ("survey_id", *cols, "geom_site", "geom"), data)
    return _copy(cur, table, ("survey_id", *cols), ((survey_id, *r) for r in rows))


def _push_body(content: SurveyContent, digest: str, products: Products, where: str):
    site = products.site
    crs = export_crs(site)
    uid = content.uid
    stats = _survey_stats(content, products)

    def body(cur) -> PushResult:
        geo = _Geo(crs, _srid(cur, crs))
        cur.execute(f"SELECT id, fingerprint, name FROM {SCHEMA}.sites WHERE name_key = %s",
                    (site_key(site.name),))
        row = cur.fetchone()
        site_added = row is None
        if row is None:
            site_id = _insert_site(cur, site, geo)
        else:
            site_id = int(row[0])
            if row[1] != site_fingerprint(site):
                raise MapperError(
                    f"the archive already holds a site named {row[2]!r} whose outline, assets, zones "
                    "or georeference differ from this survey's site; rename one of them or survey "
                    "with the archived site file; nothing was written",
                    where=where,
                )
        cur.execute(f"SELECT id, digest FROM {SCHEMA}.surveys WHERE uid = %s", (uid,))
        found = cur.fetchone()
        if found is not None and found[1] == digest:
            return PushResult(int(found[0]), "unchanged", {}, site.name)
        added: dict[str, int] = {}
        meta = content.meta_dict
        survey_cols = ("threshold_v_per_m", "display_unit", "operator", "n_readings", "n_field",
                       "max_abs_reading_v_per_m", "max_abs_map_v_per_m", "field_method", "field_source",
                       "no_field_reason", "started_utc", "finished_utc")
        if found is None:
            cur.execute(
                f"INSERT INTO {SCHEMA}.surveys (uid, site_id, name, created_utc, digest, site_json, site_text, "
                f"{', '.join(survey_cols)}) VALUES ({', '.join(['%s'] * (7 + len(survey_cols)))}) RETURNING id",
                (uid, site_id, meta.get("name", site.name), meta.get("created_utc", ""), digest,
                 content.site_json, content.site_text, *(stats[c] for c in survey_cols)),
            )
            survey_id = int(cur.fetchone()[0])
            status = "added"
            added["plan_points"] = _write_rows(cur, survey_id, "plan_points", content.tables["plan_points"], geo)
            start = {t: 0 for t in APPEND_ONLY}
        else:
            survey_id = int(found[0])
            status = "updated"
            cur.execute(f"SELECT site_json FROM {SCHEMA}.surveys WHERE id = %s", (survey_id,))
            if cur.fetchone()[0] != content.site_json or _rows_of(cur, "plan_points", survey_id) != [
                    tuple(r) for r in content.tables["plan_points"]]:
                raise MapperError("the survey's site or plan differs from its archived copy; the archive "
                                  "keeps what was pushed; nothing was written", where=where)
            start = {}
            for table in APPEND_ONLY:
                archived = _rows_of(cur, table, survey_id)
                mine = {r[0]: r for r in content.tables[table]}
                for old in archived:
                    new = mine.get(old[0])
                    if new is None or not _same(tuple(new), old):
                        raise MapperError(
                            f"{table} row {old[0]} in the survey file differs from its archived copy "
                            "(rows are only ever added); the archive keeps what was pushed; "
                            "nothing was written",
                            where=where,
                        )
                start[table] = max((r[0] for r in archived), default=0)
            cur.execute(
                f"UPDATE {SCHEMA}.surveys SET digest = %s, updated_utc = now(), "
                f"{', '.join(c + ' = %s' for c in survey_cols)} WHERE id = %s",
                (digest, *(stats[c] for c in survey_cols), survey_id),
            )
            for table in ("survey_meta", "meters", "hotspots", "sources", "zone_results", "rasters"):
                cur.execute(f"DELETE FROM {SCHEMA}.{table} WHERE survey_id = %s", (survey_id,))
        # meters before readings (readings name their meter), then the append-only tables
        _copy(cur, "survey_meta", ("survey_id", "ordinal", "key", "value"),
              ((survey_id, i, k, v) for i, (k, v) in enumerate(content.meta)))
        _copy(cur, "meters", ("survey_id", *COLUMNS["meters"]), ((survey_id, *r) for r in content.tables["meters"]))
        for table in APPEND_ONLY:
            new_rows = [r for r in content.tables[table] if r[0] > start[table]]
            added[table] = _write_rows(cur, survey_id, table, new_rows, geo)
        for table, rows in _product_rows(products, geo).items():
            cols = _PRODUCT_COLUMNS[table]
            _copy(cur, table, ("survey_id", *cols), ((survey_id, *r) for r in rows))
        return PushResult(survey_id, status, added, site.name, site_added)

    return body


def push(survey_path: str | Path, url: str | None) -> PushResult:
    """Push one survey file into the archive (see the module docstring).

    Parameters
    ----------
    survey_path : str or Path
        The survey file (opened read-only; nothing is written to it).
    url : str or None
        Archive connection (libpq URL or ``PG*`` environment variables).
    """
    where = describe(url)
    with Survey.open(survey_path) as survey, connect(url, autocommit=True) as conn:
        with conn.cursor() as cur:
            check(cur, where)
        # one read transaction on the survey file: the rows and the products come from the same
        # state even while someone goes on recording into it
        survey.conn.execute("BEGIN")
        try:
            content = read_content(survey)
            digest = content.digest()
            with conn.cursor() as cur:
                cur.execute(f"SELECT id, digest FROM {SCHEMA}.surveys WHERE uid = %s", (content.uid,))
                found = cur.fetchone()
            if found is not None and found[1] == digest:
                return PushResult(int(found[0]), "unchanged", {}, survey.name)
            products = survey_products(survey)
        finally:
            survey.conn.execute("ROLLBACK")
        # pushes to one site queue on a session-level advisory lock taken before the transaction
        # starts, so each one's snapshot already sees what the one before it committed (a lock
        # taken inside would come after the snapshot); the lock dies with the connection
        key = f"mapper_archive site {site_key(products.site.name)}"
        with conn.cursor() as cur:
            cur.execute("SELECT pg_advisory_lock(hashtext(%s))", (key,))
        try:
            return run_transaction(conn, _push_body(content, digest, products, where))
        finally:
            try:
                with conn.cursor() as cur:
                    cur.execute("SELECT pg_advisory_unlock(hashtext(%s))", (key,))
            except psycopg().Error:  # the connection is gone, and the lock with it
                pass
