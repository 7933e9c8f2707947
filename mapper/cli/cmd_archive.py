"""``mapper archive``: the shared survey archive on PostgreSQL/PostGIS.

``init`` creates or migrates the archive, ``push`` uploads a survey in one transaction,
``list`` shows what is archived, ``pull`` writes an archived survey back to a survey file and
``history`` follows a site over its surveys. The database is named by ``--db`` (a libpq URL or
key/value string) or, without it, by the ``PG*`` environment variables. psycopg is imported
only here, when an archive command runs (``pip install 'mapper[archive]'``).
"""

from __future__ import annotations

import argparse
import json

from mapper.cli.commands import summary
from mapper.cli.common import fmt, say, table, warn

DB_HELP = ("archive database: libpq URL such as postgresql://user@host/dbname (default: the PG* "
           "environment variables); keep the password in ~/.pgpass, not here")


def register(sub) -> None:
    p = sub.add_parser(
        "archive",
        help=summary("archive"),
        description="Keep many sites' surveys in one PostgreSQL/PostGIS database that a desktop GIS "
        "can read; the survey file stays the offline field copy.",
    )
    verbs = p.add_subparsers(dest="verb", metavar="VERB", parser_class=type(p))
    verbs.required = True

    v = verbs.add_parser("init", help="create or migrate the archive schema (as the database owner)")
    v.add_argument("--db", metavar="URL", help=DB_HELP)
    v.set_defaults(func=run_init)

    v = verbs.add_parser("push", help="upload one survey in one transaction (again: adds only new rows)")
    v.add_argument("survey", metavar="SURVEY", help="survey file")
    v.add_argument("--db", metavar="URL", help=DB_HELP)
    v.set_defaults(func=run_push)

    v = verbs.add_parser("list", help="list archived surveys")
    v.add_argument("--site", metavar="NAME", help="only this site")
    v.add_argument("--db", metavar="URL", help=DB_HELP)
    v.add_argument("--json", action="store_true", help="print JSON instead of text")
    v.set_defaults(func=run_list)

    v = verbs.add_parser("pull", help="write an archived survey to a new survey file")
    v.add_argument("id", metavar="ID", type=_survey_id, help="archive id (see 'mapper archive list')")
    v.add_argument("out", metavar="OUT.survey", help="new survey file")
    v.add_argument("--db", metavar="URL", help=DB_HELP)
    v.set_defaults(func=run_pull)

    v = verbs.add_parser("history", help="a site's surveys over time: |E|, hotspots, zones")
    v.add_argument("--site", metavar="NAME", required=True, help="site name")
    v.add_argument("--db", metavar="URL", help=DB_HELP)
    v.add_argument("--json", action="store_true", help="print JSON instead of text")
    v.set_defaults(func=run_history)


def _survey_id(text: str) -> int:
    try:
        value = int(text)
    except ValueError:
        raise argparse.ArgumentTypeError(f"{text!r} is not a survey id (a whole number from 'mapper archive "
                                         "list')") from None
    if value < 1:
        raise argparse.ArgumentTypeError(f"{text!r} is not a survey id (ids start at 1)")
    return value


def _db(args) -> str | None:
    from mapper.archive.connect import has_password

    if has_password(args.db):
        warn("the --db URL holds a password; keep it in ~/.pgpass (or PGPASSFILE) instead")
    return args.db


def run_init(args) -> int:
    from mapper.archive.connect import connect, describe
    from mapper.archive.schema import initialise

    url = _db(args)
    with connect(url, autocommit=True) as conn:
        result = initialise(conn, describe(url))
    if result.found_version == result.version:
        say(f"archive schema version {result.version} already in place (PostGIS {result.postgis}); grants renewed")
    else:
        say(f"archive schema created: version {result.found_version} -> {result.version} (PostGIS {result.postgis})")
    for role in result.roles:
        say(f"created group role {role} (grant it to login roles; see docs/archive.md)")
    for note in result.notes:
        warn(note)
    return 0


def run_push(args) -> int:
    from mapper.archive.push import push

    result = push(args.survey, _db(args))
    if result.status == "unchanged":
        say(f"survey {result.survey_id} ({result.site}) already archived; nothing changed")
        return 0
    rows = ", ".join(f"{n} {t.replace('_', ' ')}" for t, n in result.added.items() if n)
    verb = "archived as" if result.status == "added" else "updated"
    say(f"{verb} survey {result.survey_id} ({result.site}{', new site' if result.site_added else ''}): "
        f"added {rows or 'no rows'}")
    return 0


def run_list(args) -> int:
    from mapper.archive.pull import list_surveys

    surveys = list_surveys(_db(args), args.site)
    if args.json:
        say(json.dumps([s.to_dict() for s in surveys], indent=2))
        return 0
    if not surveys:
        say("the archive holds no surveys yet ('mapper archive push SURVEY')")
        return 0
    say(table(
        [(s.id, s.site, (s.started_utc or "-")[:16], s.n_field, s.n_readings, s.n_hotspots,
          fmt(s.max_abs_v_per_m, "V/m"), s.operator or "-") for s in surveys],
        ("id", "site", "started (UTC)", "field readings", "rows", "hotspots", "largest |E|", "operator"),
    ))
    return 0


def run_pull(args) -> int:
    from mapper.archive.pull import pull

    path = pull(_db(args), args.id, args.out)
    say(f"wrote survey {args.id} to {path}")
    return 0


def run_history(args) -> int:
    from mapper.archive.history import site_history

    history = site_history(_db(args), args.site)
    if args.json:
        say(json.dumps(history.to_dict(), indent=2))
        return 0
    say(f"site {history.site}: {len(history.surveys)} surveys")
    zone_names = [z.zone for z in history.surveys[0].zones] if history.surveys else []
    header = ["survey", "started (UTC)", "largest |E|", "hotspot m²"]
    for name in zone_names:
        header += [f"{name} m²", f"{name}"]
    rows = []
    for s in history.surveys:
        row = [s.survey_id, (s.started_utc or "-")[:16], fmt(s.max_abs_v_per_m, "V/m"), f"{s.hotspot_area_m2:.1f}"]
        for z in s.zones:
            row += [f"{z.hotspot_area_m2:.1f}", "-" if z.passed is None else ("pass" if z.passed else "FAIL")]
        rows.append(row)
    say(table(rows, header))
    if history.places:
        say("")
        ids = [s.survey_id for s in history.surveys]
        place_rows = []
        for p in history.places:
            marks = [(history.surveys[k].status_of(p.id) or "-") for k in range(len(ids))]
            place_rows.append([p.id, p.polarity, p.nearest_asset or "-", f"{p.x_m:.1f}, {p.y_m:.1f}", *marks])
        say(table(place_rows, ["place", "polarity", "nearest asset", "x, y (m)", *[f"survey {i}" for i in ids]]))
    return 0
