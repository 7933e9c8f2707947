"""Listing the archive's surveys and pulling one back into a survey file."""

from __future__ import annotations

from dataclasses import dataclass
from pathlib import Path

from mapper.archive.connect import connect, describe
from mapper.archive.push import site_key
from mapper.archive.schema import SCHEMA, check
from mapper.errors import MapperError
from mapper.survey.content import COLUMNS, ORDER_BY, SurveyContent, write_content


@dataclass(frozen=True)
class ArchivedSurvey:
    """One survey as the archive lists it.

    Attributes
    ----------
    id : int
        Archive id (``mapper archive pull ID``).
    site : str
        Site name.
    started_utc, finished_utc : str or None
        First and last field reading, ISO 8601 UTC.
    n_readings : int
        Rows in the readings table (all actions).
    n_field : int
        Current field readings.
    n_hotspots : int
        Site-wide hotspots.
    max_abs_v_per_m : float or None
        Largest |E| measured or mapped, V/m.
    operator : str
        Who surveyed.
    pushed_utc : str
        When first pushed.
    """

    id: int
    site: str
    started_utc: str | None
    finished_utc: str | None
    n_readings: int
    n_field: int
    n_hotspots: int
    max_abs_v_per_m: float | None
    operator: str
    pushed_utc: str

    def to_dict(self) -> dict:
        """JSON-ready form."""
        return dict(self.__dict__)


def list_surveys(url: str | None, site: str | None = None) -> list[ArchivedSurvey]:
    """The archive's surveys, by site and then by time.

    Parameters
    ----------
    url : str or None
        Archive connection.
    site : str, optional
        Only this site (name matched trimmed and case-insensitively).
    """
    where = describe(url)
    with connect(url, autocommit=True) as conn, conn.cursor() as cur:
        check(cur, where)
        sql = (
            f"SELECT v.id, s.name, v.started_utc, v.finished_utc, v.n_readings, v.n_field, "
            f"(SELECT count(*) FROM {SCHEMA}.hotspots h WHERE h.survey_id = v.id AND h.scope = ''), "
            "GREATEST(v.max_abs_reading_v_per_m, v.max_abs_map_v_per_m), v.operator, v.pushed_utc "
            f"FROM {SCHEMA}.surveys v JOIN {SCHEMA}.sites s ON s.id = v.site_id"
        )
        args: tuple = ()
        if site is not None:
            sql += " WHERE s.name_key = %s"
            args = (site_key(site),)
        cur.execute(sql + " ORDER BY s.name, v.started_utc NULLS LAST, v.id", args)
        rows = cur.fetchall()
        if site is not None and not rows:
            raise MapperError(f"the archive holds no survey of a site named {site!r}", where=where)
    return [
        ArchivedSurvey(int(r[0]), r[1], _iso(r[2]), _iso(r[3]), int(r[4]), int(r[5]), int(r[6]),
                       None if r[7] is None else float(r[7]), r[8], _iso(r[9]) or "")
        for r in rows
    ]


def _iso(value) -> str | None:
    return None if value is None else value.isoformat()


def archived_content(cur, survey_id: int, where: str) -> SurveyContent:
    """Every row the archive holds of one survey, as a survey file would hold them."""
    cur.execute(f"SELECT site_json, site_text FROM {SCHEMA}.surveys WHERE id = %s", (survey_id,))
    row = cur.fetchone()
    if row is None:
        raise MapperError(f"the archive holds no survey with id {survey_id} (see 'mapper archive list')",
                          where=where)
    site_json, site_text = row
    cur.execute(f"SELECT key, value FROM {SCHEMA}.survey_meta WHERE survey_id = %s ORDER BY ordinal", (survey_id,))
    meta = tuple((k, v) for k, v in cur.fetchall())
    tables = {}
    for name, cols in COLUMNS.items():
        quoted = ", ".join(f'"{c}"' for c in cols)
        cur.execute(f"SELECT {quoted} FROM {SCHEMA}.{name} WHERE survey_id = %s ORDER BY {ORDER_BY[name]}",
                    (survey_id,))
        tables[name] = tuple(tuple(bytes(v) if isinstance(v, memoryview) else v for v in r)
                             for r in cur.fetchall())
    return SurveyContent(meta, site_json, site_text, tables)


def pull(url: str | None, survey_id: int, out: str | Path) -> Path:
    """Write an archived survey to a new survey file, row for row as it was pushed.

    Parameters
    ----------
    url : str or None
        Archive connection.
    survey_id : int
        Archive id of the survey.
    out : str or Path
        New survey file (refused if it exists).
    """
    out = Path(out)
    if out.exists():
        raise MapperError("survey file already exists; choose another name", where=str(out))
    where = describe(url)
    with connect(url, autocommit=True) as conn:
        # one REPEATABLE READ snapshot: a push landing meanwhile is either all in the copy or not
        with conn.transaction(), conn.cursor() as cur:
            cur.execute("SET TRANSACTION ISOLATION LEVEL REPEATABLE READ READ ONLY")
            check(cur, where)
            content = archived_content(cur, survey_id, where)
    return write_content(out, content)
