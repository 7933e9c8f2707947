"""The archive's PostgreSQL schema, its migrations and the two roles that use it.

Everything lives in the schema :data:`SCHEMA`. ``schema_migrations`` holds one row per applied
entry of :data:`MIGRATIONS` (index i takes the archive from version i to i + 1); a new entry is
added for every change, old entries are never edited. Geometries are stored twice: ``geom`` in
the site's real CRS (per-row SRID, the EPSG code when the site is georeferenced and PostGIS
knows the code, else NULL) and ``geom_site`` in site metres (SRID 0). Both have GiST indexes.

Rows a survey file only ever appends (readings, conditions, events, stored field models) are
only ever inserted: the writer role has no UPDATE or DELETE on them. Derived products (hotspots,
sources, zone results, the raster) are replaced when a survey is pushed again with new rows.
"""

from __future__ import annotations

from dataclasses import dataclass

from mapper.errors import MapperError

#: PostgreSQL schema holding the archive.
SCHEMA = "mapper_archive"
#: Group roles ``init`` creates (NOLOGIN; grant them to login roles).
READER_ROLE = "mapper_archive_reader"
WRITER_ROLE = "mapper_archive_writer"

_V1 = f"""
CREATE TABLE {SCHEMA}.sites (
    id            bigserial PRIMARY KEY,
    name          text NOT NULL,
    name_key      text NOT NULL UNIQUE,
    fingerprint   text NOT NULL,
    site_json     jsonb NOT NULL,
    crs           text,
    srid          integer,
    outline_site  geometry NOT NULL,
    outline       geometry,
    created_utc   timestamptz NOT NULL DEFAULT now()
);
CREATE TABLE {SCHEMA}.zones (
    site_id        bigint NOT NULL REFERENCES {SCHEMA}.sites(id),
    ordinal        integer NOT NULL,
    name           text NOT NULL,
    kind           text NOT NULL,
    limit_v_per_m  double precision,
    geom_site      geometry NOT NULL,
    geom           geometry,
    PRIMARY KEY (site_id, ordinal)
);
CREATE TABLE {SCHEMA}.assets (
    site_id    bigint NOT NULL REFERENCES {SCHEMA}.sites(id),
    ordinal    integer NOT NULL,
    name       text NOT NULL,
    kind       text NOT NULL,
    sensitive  boolean NOT NULL,
    walkable   boolean NOT NULL,
    height_m   double precision,
    geom_site  geometry NOT NULL,
    geom       geometry,
    PRIMARY KEY (site_id, ordinal)
);
CREATE TABLE {SCHEMA}.surveys (
    id               bigserial PRIMARY KEY,
    uid              text NOT NULL UNIQUE,
    site_id          bigint NOT NULL REFERENCES {SCHEMA}.sites(id),
    name             text NOT NULL,
    created_utc      text NOT NULL,
    started_utc      timestamptz,
    finished_utc     timestamptz,
    digest           text NOT NULL,
    site_json        text NOT NULL,
    site_text        text,
    threshold_v_per_m double precision NOT NULL,
    display_unit     text NOT NULL,
    operator         text NOT NULL DEFAULT '',
    n_readings       integer NOT NULL,
    n_field          integer NOT NULL,
    max_abs_reading_v_per_m double precision,
    max_abs_map_v_per_m     double precision,
    field_method     text,
    field_source     text,
    no_field_reason  text,
    pushed_utc       timestamptz NOT NULL DEFAULT now(),
    updated_utc      timestamptz NOT NULL DEFAULT now(),
    pushed_by        text NOT NULL DEFAULT current_user
);
CREATE INDEX surveys_site ON {SCHEMA}.surveys (site_id, started_utc);
CREATE TABLE {SCHEMA}.survey_meta (
    survey_id  bigint NOT NULL REFERENCES {SCHEMA}.surveys(id),
    ordinal    integer NOT NULL,
    key        text NOT NULL,
    value      text NOT NULL,
    PRIMARY KEY (survey_id, key)
);
CREATE TABLE {SCHEMA}.plan_points (
    survey_id   bigint NOT NULL REFERENCES {SCHEMA}.surveys(id),
    label       text NOT NULL,
    "row"       integer NOT NULL,
    col         integer NOT NULL,
    x_m         double precision NOT NULL,
    y_m         double precision NOT NULL,
    walk_order  integer NOT NULL,
    geom_site   geometry NOT NULL,
    geom        geometry,
    PRIMARY KEY (survey_id, label)
);
CREATE TABLE {SCHEMA}.meters (
    survey_id  bigint NOT NULL REFERENCES {SCHEMA}.surveys(id),
    id         text NOT NULL,
    json       text NOT NULL,
    PRIMARY KEY (survey_id, id)
);
CREATE TABLE {SCHEMA}.readings (
    survey_id      bigint NOT NULL REFERENCES {SCHEMA}.surveys(id),
    id             bigint NOT NULL,
    action         text NOT NULL,
    replaces       bigint,
    point          text,
    x_m            double precision NOT NULL,
    y_m            double precision NOT NULL,
    entered_value  double precision NOT NULL,
    entered_unit   text NOT NULL,
    value_v_per_m  double precision NOT NULL,
    kind           text NOT NULL,
    time_utc       text NOT NULL,
    height_m       double precision,
    meter_id       text NOT NULL,
    note           text NOT NULL,
    flags          text NOT NULL,
    source         text NOT NULL,
    recorded_utc   text NOT NULL,
    geom_site      geometry NOT NULL,
    geom           geometry,
    PRIMARY KEY (survey_id, id)
);
CREATE TABLE {SCHEMA}.conditions (
    survey_id      bigint NOT NULL REFERENCES {SCHEMA}.surveys(id),
    id             bigint NOT NULL,
    time_utc       text NOT NULL,
    rh_percent     double precision,
    temperature_c  double precision,
    note           text NOT NULL,
    PRIMARY KEY (survey_id, id)
);
CREATE TABLE {SCHEMA}.events (
    survey_id  bigint NOT NULL REFERENCES {SCHEMA}.surveys(id),
    id         bigint NOT NULL,
    time_utc   text NOT NULL,
    kind       text NOT NULL,
    detail     text NOT NULL,
    PRIMARY KEY (survey_id, id)
);
CREATE TABLE {SCHEMA}.field_models (
    survey_id    bigint NOT NULL REFERENCES {SCHEMA}.surveys(id),
    id           bigint NOT NULL,
    created_utc  text NOT NULL,
    method       text NOT NULL,
    summary      text NOT NULL,
    data         bytea NOT NULL,
    PRIMARY KEY (survey_id, id)
);
CREATE TABLE {SCHEMA}.hotspots (
    survey_id            bigint NOT NULL REFERENCES {SCHEMA}.surveys(id),
    scope                text NOT NULL,
    hotspot_id           text NOT NULL,
    polarity             text NOT NULL,
    zone                 text,
    zones                text[] NOT NULL,
    threshold_v_per_m    double precision NOT NULL,
    peak_v_per_m         double precision NOT NULL,
    peak_x_m             double precision NOT NULL,
    peak_y_m             double precision NOT NULL,
    mean_v_per_m         double precision NOT NULL,
    max_reading_v_per_m  double precision,
    status               text NOT NULL,
    p_exceed_max         double precision,
    nearest_asset        text,
    nearest_asset_m      double precision,
    area_m2              double precision NOT NULL,
    reading_ids          bigint[] NOT NULL,
    geom_site            geometry NOT NULL,
    geom                 geometry,
    PRIMARY KEY (survey_id, scope, hotspot_id)
);
CREATE TABLE {SCHEMA}.sources (
    survey_id  bigint NOT NULL REFERENCES {SCHEMA}.surveys(id),
    source_id  text NOT NULL,
    record     jsonb NOT NULL,
    geom_site  geometry NOT NULL,
    geom       geometry,
    PRIMARY KEY (survey_id, source_id)
);
CREATE TABLE {SCHEMA}.zone_results (
    survey_id            bigint NOT NULL REFERENCES {SCHEMA}.surveys(id),
    zone                 text NOT NULL,
    limit_v_per_m        double precision NOT NULL,
    limit_source         text NOT NULL,
    exceeded             boolean NOT NULL,
    worst_v_per_m        double precision,
    worst_from           text,
    worst_x_m            double precision,
    worst_y_m            double precision,
    excess_v_per_m       double precision,
    max_reading_v_per_m  double precision,
    n_readings           integer NOT NULL,
    PRIMARY KEY (survey_id, zone)
);
CREATE TABLE {SCHEMA}.rasters (
    survey_id    bigint PRIMARY KEY REFERENCES {SCHEMA}.surveys(id),
    method       text NOT NULL,
    source       text NOT NULL,
    nx           integer NOT NULL,
    ny           integer NOT NULL,
    data         bytea NOT NULL,
    extent_site  geometry NOT NULL,
    extent       geometry
);
CREATE INDEX sites_outline_site_gix ON {SCHEMA}.sites USING gist (outline_site);
CREATE INDEX sites_outline_gix ON {SCHEMA}.sites USING gist (outline);
CREATE INDEX zones_geom_site_gix ON {SCHEMA}.zones USING gist (geom_site);
CREATE INDEX zones_geom_gix ON {SCHEMA}.zones USING gist (geom);
CREATE INDEX assets_geom_site_gix ON {SCHEMA}.assets USING gist (geom_site);
CREATE INDEX assets_geom_gix ON {SCHEMA}.assets USING gist (geom);
CREATE INDEX plan_points_geom_site_gix ON {SCHEMA}.plan_points USING gist (geom_site);
CREATE INDEX readings_geom_site_gix ON {SCHEMA}.readings USING gist (geom_site);
CREATE INDEX readings_geom_gix ON {SCHEMA}.readings USING gist (geom);
CREATE INDEX hotspots_geom_site_gix ON {SCHEMA}.hotspots USING gist (geom_site);
CREATE INDEX hotspots_geom_gix ON {SCHEMA}.hotspots USING gist (geom);
CREATE INDEX sources_geom_site_gix ON {SCHEMA}.sources USING gist (geom_site);
CREATE INDEX rasters_extent_gix ON {SCHEMA}.rasters USING gist (extent);
-- every site's latest survey (by when its readings were taken), its site-wide hotspots, in
-- WGS 84 for any GIS and in the site's own CRS and metres
CREATE VIEW {SCHEMA}.latest_hotspots AS
SELECT s.name AS site, v.id AS survey_id, v.started_utc, h.hotspot_id, h.polarity, h.status,
       h.peak_v_per_m, h.max_reading_v_per_m, h.threshold_v_per_m, h.area_m2, h.nearest_asset,
       h.nearest_asset_m, h.zones, s.crs,
       CASE WHEN h.geom IS NULL THEN NULL
            ELSE ST_Multi(ST_Transform(h.geom, 4326))::geometry(MultiPolygon, 4326) END AS geom,
       h.geom AS geom_crs,
       ST_Multi(h.geom_site) AS geom_site
FROM {SCHEMA}.sites s
JOIN LATERAL (
    SELECT id, started_utc FROM {SCHEMA}.surveys
    WHERE site_id = s.id ORDER BY started_utc DESC NULLS LAST, id DESC LIMIT 1
) v ON true
JOIN {SCHEMA}.hotspots h ON h.survey_id = v.id AND h.scope = '';
"""

#: Migrations; index i takes an archive from version i to version i + 1.
MIGRATIONS: tuple[str, ...] = (_V1,)
SCHEMA_VERSION = len(MIGRATIONS)

#: Tables only ever inserted into (the writer may not change or delete their rows).
INSERT_ONLY = ("sites", "zones", "assets", "plan_points", "readings", "conditions", "events",
               "field_models")
#: Tables whose rows a push may replace: a survey's state and its derived products.
REPLACEABLE = ("surveys", "survey_meta", "meters", "hotspots", "sources", "zone_results", "rasters")

MIGRATIONS_TABLE = f"""
CREATE TABLE IF NOT EXISTS {SCHEMA}.schema_migrations (
    version        integer PRIMARY KEY,
    applied_utc    timestamptz NOT NULL DEFAULT now(),
    mapper_version text NOT NULL
)
"""


def grants() -> list[str]:
    """SQL giving the reader and writer roles what they need, and no more."""
    tables = ", ".join(f"{SCHEMA}.{t}" for t in INSERT_ONLY + REPLACEABLE)
    replaceable = ", ".join(f"{SCHEMA}.{t}" for t in REPLACEABLE)
    return [
        f"GRANT USAGE ON SCHEMA {SCHEMA} TO {READER_ROLE}, {WRITER_ROLE}",
        f"GRANT SELECT ON ALL TABLES IN SCHEMA {SCHEMA} TO {READER_ROLE}, {WRITER_ROLE}",
        f"GRANT INSERT ON {tables} TO {WRITER_ROLE}",
        f"GRANT UPDATE, DELETE ON {replaceable} TO {WRITER_ROLE}",
        f"GRANT USAGE ON ALL SEQUENCES IN SCHEMA {SCHEMA} TO {WRITER_ROLE}",
    ]


@dataclass(frozen=True)
class InitResult:
    """What :func:`initialise` did.

    Attributes
    ----------
    found_version, version : int
        Archive schema version before and after.
    postgis : str
        PostGIS version of the database.
    roles : tuple of str
        Group roles created now.
    notes : tuple of str
        Remarks (for example roles that could not be created by this user).
    """

    found_version: int
    version: int
    postgis: str
    roles: tuple[str, ...] = ()
    notes: tuple[str, ...] = ()


def _version_found(cur) -> int | None:
    cur.execute("SELECT to_regclass(%s)", (f"{SCHEMA}.schema_migrations",))
    if cur.fetchone()[0] is None:
        return None
    cur.execute(f"SELECT COALESCE(MAX(version), 0) FROM {SCHEMA}.schema_migrations")
    return int(cur.fetchone()[0])


def _newer(found: int, where: str) -> MapperError:
    return MapperError(
        f"the archive has schema version {found}, newer than this mapper ({SCHEMA_VERSION}); "
        "upgrade mapper; nothing was written",
        where=where,
    )


def postgis_version(cur) -> str | None:
    """The database's PostGIS version, or ``None`` when the extension is not created there."""
    cur.execute("SELECT extversion FROM pg_extension WHERE extname = 'postgis'")
    row = cur.fetchone()
    return row[0] if row else None


def check(cur, where: str) -> int:
    """Refuse, in one line, a database that is not a usable archive; returns its version.

    Parameters
    ----------
    cur : psycopg.Cursor
        Open cursor.
    where : str
        The database, for messages (:func:`mapper.archive.connect.describe`).
    """
    if postgis_version(cur) is None:
        raise MapperError(
            "the database has no PostGIS extension, so it holds no archive; run "
            "'mapper archive init --db URL' (as the database owner) first; nothing was written",
            where=where,
        )
    found = _version_found(cur)
    if found is None or found == 0:
        raise MapperError(
            "the database holds no mapper archive; run 'mapper archive init --db URL' first; "
            "nothing was written",
            where=where,
        )
    if found > SCHEMA_VERSION:
        raise _newer(found, where)
    if found < SCHEMA_VERSION:
        raise MapperError(
            f"the archive has schema version {found}, older than this mapper ({SCHEMA_VERSION}); "
            "run 'mapper archive init --db URL' to migrate it; nothing was written",
            where=where,
        )
    return found


def initialise(conn, where: str) -> InitResult:
    """Create or migrate the archive in the connected database, in one transaction.

    Creates the PostGIS extension when missing (this needs a role allowed to), the schema,
    pending migrations, the reader and writer group roles (when this role may create roles)
    and their grants. Safe to run again: it then changes nothing but the grants.

    Parameters
    ----------
    conn : psycopg.Connection
        Connection in autocommit mode, as the database owner.
    where : str
        The database, for messages.
    """
    from psycopg import errors

    from mapper import __version__

    notes: list[str] = []
    created_roles: list[str] = []
    with conn.cursor() as cur:
        cur.execute("SELECT default_version FROM pg_available_extensions WHERE name = 'postgis'")
        if cur.fetchone() is None:
            raise MapperError(
                "the PostgreSQL server has no PostGIS extension installed (Debian: apt-get install "
                "postgresql-postgis); nothing was written",
                where=where,
            )
    try:
        with conn.transaction(), conn.cursor() as cur:
            cur.execute("SELECT pg_advisory_xact_lock(hashtext('mapper_archive init'))")
            if postgis_version(cur) is None:
                try:
                    with conn.transaction():
                        cur.execute("CREATE EXTENSION IF NOT EXISTS postgis")
                except errors.InsufficientPrivilege:
                    raise MapperError(
                        "this role may not create the PostGIS extension; ask the database owner or "
                        "an administrator to run CREATE EXTENSION postgis in it once; nothing was written",
                        where=where,
                    ) from None
            postgis = postgis_version(cur) or ""
            found = _version_found(cur)
            if found is not None and found > SCHEMA_VERSION:
                raise _newer(found, where)
            cur.execute(f"CREATE SCHEMA IF NOT EXISTS {SCHEMA}")
            cur.execute(MIGRATIONS_TABLE)
            found = found or 0
            for version in range(found, SCHEMA_VERSION):
                cur.execute(MIGRATIONS[version])
                cur.execute(
                    f"INSERT INTO {SCHEMA}.schema_migrations (version, mapper_version) VALUES (%s, %s)",
                    (version + 1, __version__),
                )
            for role in (READER_ROLE, WRITER_ROLE):
                cur.execute("SELECT 1 FROM pg_roles WHERE rolname = %s", (role,))
                if cur.fetchone() is None:
                    try:
                        with conn.transaction():
                            cur.execute(f"CREATE ROLE {role} NOLOGIN")
                        created_roles.append(role)
                    except errors.InsufficientPrivilege:
                        notes.append(f"role {role} not created (this role lacks CREATEROLE); see docs/archive.md")
            cur.execute("SELECT rolname FROM pg_roles WHERE rolname IN (%s, %s)", (READER_ROLE, WRITER_ROLE))
            if len(cur.fetchall()) == 2:
                for sql in grants():
                    cur.execute(sql)
    except errors.InsufficientPrivilege as exc:
        raise MapperError(f"permission denied while creating the archive ({exc}); nothing was written",
                          where=where) from None
    return InitResult(found, SCHEMA_VERSION, postgis, tuple(created_roles), tuple(notes))
