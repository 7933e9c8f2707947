"""``mapper review``: readings to look at again, and keeping a reading out of the map (undoably)."""

from __future__ import annotations

import json

from mapper.cli.commands import summary
from mapper.cli.common import fmt, say, table
from mapper.corrections.outliers import OUTLIER_FLAG
from mapper.corrections.pipeline import correct_survey
from mapper.errors import MapperError
from mapper.readings.model import DOUBTFUL_FLAG, EXCLUDED_FLAG
from mapper.survey.store import Survey


def register(sub) -> None:
    p = sub.add_parser(
        "review",
        help=summary('review'),
        description="Lists readings the outlier check or the surveyor flagged. --exclude keeps a "
        "reading out of the field model (it stays in the survey and the exports, flagged); "
        "--include undoes that. Both are recorded as superseding edits, never deletions.",
    )
    p.add_argument("survey", help="survey file")
    group = p.add_mutually_exclusive_group()
    group.add_argument("--exclude", type=int, metavar="ID", help="keep reading ID out of the field model")
    group.add_argument("--include", type=int, metavar="ID", help="bring an excluded reading ID back")
    p.add_argument("--reason", default="", help="why (kept in the reading's note)")
    p.add_argument("--json", action="store_true", help="print JSON instead of text")
    p.set_defaults(func=run)


def set_excluded(survey: Survey, reading_id: int, excluded: bool, reason: str = "") -> int:
    """Flag or unflag a current reading as excluded; returns the id of the superseding row."""
    current = {r.id: r for r in survey.readings(kind=None)}
    latest = survey.current_version(reading_id)  # an id from before an edit still finds the reading
    if latest is None or latest not in current:
        raise MapperError(f"reading {reading_id} is not a current reading (see 'mapper review')")
    reading = current[latest]
    reading_id = latest
    flags = [f for f in reading.flags if f != EXCLUDED_FLAG]
    if excluded:
        if EXCLUDED_FLAG in reading.flags:
            raise MapperError(f"reading {reading_id} is already excluded")
        flags.append(EXCLUDED_FLAG)
    elif EXCLUDED_FLAG not in reading.flags:
        raise MapperError(f"reading {reading_id} is not excluded")
    note = reading.note
    if reason:
        note = f"{note}; {reason}" if note else reason
    return survey.supersede(reading_id, "edit", {"flags": flags, "note": note})


#: What each flag the review can list means (only those listed are explained).
FLAG_MEANINGS = {
    OUTLIER_FLAG: "differs from its neighbours beyond what the local trend explains; measure it again "
                  "or exclude it with --exclude ID (nothing is removed automatically)",
    EXCLUDED_FLAG: "left out of the field model by hand (--include ID takes it back)",
    DOUBTFUL_FLAG: "marked doubtful by the surveyor in the survey app; still used in the field model",
}


def run(args) -> int:
    if args.exclude is not None or args.include is not None:
        with Survey.open(args.survey, write=True) as survey:
            target = args.exclude if args.exclude is not None else args.include
            new_id = set_excluded(survey, target, args.exclude is not None, args.reason)
        action = "excluded from" if args.exclude is not None else "back in"
        say(f"reading {target} is {action} the field model (now reading {new_id}; the change can be undone)")
        return 0
    with Survey.open(args.survey) as survey:
        unit = survey.display_unit
        result = correct_survey(survey)
    rows = []
    for r in result.readings:
        flags = sorted(set(r.flags) | set(r.reading.flags))
        if not flags:
            continue
        rows.append({
            "id": r.reading.id,
            "point": r.reading.point or "",
            "x_m": r.reading.x,
            "y_m": r.reading.y,
            "value_v_per_m": r.value_v_per_m,
            "flags": flags,
            "note": r.reading.note,
        })
    if args.json:
        say(json.dumps(rows, indent=2))
        return 0
    if not rows:
        say("no reading is flagged for review")
        return 0
    say(table(
        [[r["id"], r["point"] or "-", f"{r['x_m']:.2f}, {r['y_m']:.2f}", fmt(r["value_v_per_m"], unit),
          ", ".join(r["flags"]), r["note"]] for r in rows],
        ["id", "point", "x, y (m)", "corrected", "flags", "note"],
    ))
    listed = {f for r in rows for f in r["flags"]}
    for flag in sorted(listed):
        meaning = FLAG_MEANINGS.get(flag, "set by hand on the reading")
        say(f"'{flag}': {meaning}")
    return 0
