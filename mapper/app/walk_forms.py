"""The main screen's forms: free position, go to a point, edit or note, conditions, settings.

Each function builds a :class:`~mapper.app.forms.FormScreen` whose callback changes the walk
through :class:`~mapper.app.session.WalkSession` (committed before the form closes) and returns
the confirmation for the status line. What the screen must do afterwards (redraw, refit, store
the position) comes in as callables.
"""

from __future__ import annotations

from collections.abc import Callable
from datetime import timedelta

from mapper.app.entry_line import ENTRY_PATTERN
from mapper.app.forms import Field, FormScreen
from mapper.app.session import DRY_AIR_RH_PERCENT, WalkSession, parse_conditions, parse_xy
from mapper.errors import MapperError
from mapper.units import FIELD_UNITS, canonical_unit, format_field


def free_form(s: WalkSession, moved: Callable[[], None]) -> FormScreen:
    """Take readings at an off-grid position typed as ``x, y``."""
    x, y = s.position

    def submit(values: dict[str, str]) -> str:
        fx, fy = s.free(*parse_xy(values["xy"]))
        moved()
        return f"free position ({fx:.2f}, {fy:.2f}) m: type readings, arrows nudge, F4 back to grid"

    return FormScreen(
        "Free-position reading",
        [Field("xy", "position x, y (site metres)", f"{x:.2f}, {y:.2f}", "e.g. 4.5, 2", r"[0-9+\-., ;eE]*")],
        submit,
        explain="For places off the grid, e.g. right beside a conveyor. After this, arrows "
        "nudge the cursor by a quarter spacing and a click on the map places it.",
        form_id="free-form",
    )


def jump_form(s: WalkSession, moved: Callable[[], None], remember: Callable[[], None]) -> FormScreen:
    """Go to a planned point by its label."""

    def submit(values: dict[str, str]) -> str:
        p = s.jump(values["label"])
        remember()
        moved()
        return f"at {p.label}"

    return FormScreen(
        "Go to point",
        [Field("label", "point label", placeholder=f"e.g. {s.points[len(s.points) // 2].label}")],
        submit,
        form_id="jump-form",
    )


def edit_form(s: WalkSession, refit: Callable[[], None]) -> FormScreen:
    """Change a reading here (value, note, doubtful flag), or note the place when none is here."""
    choices = [(str(r.id), f"#{r.id} {s.describe(r)}  {r.time.astimezone():%H:%M:%S}") for r in s.readings_here()]

    def submit(values: dict[str, str]) -> str:
        doubtful = values.get("check") == "1"
        if "choice" not in values:
            if not values["note"].strip():
                raise MapperError("type a note (there is no reading here to edit)")
            s.note_place(values["note"], doubtful)
            return f"noted at {s.where} (in the survey log)"
        note = values["note"].strip() or None  # blank keeps the stored note
        new = s.revise(int(values["choice"]), values["value"], note, True if doubtful else None)
        if new is None:
            return "nothing changed"
        if values["value"].strip():
            refit()
        flag = " [doubtful]" if doubtful else ""
        note = f" “{new.note}”" if new.note else ""
        return f"saved edit {s.describe(new)}{flag}{note} (old row kept, marked replaced)"

    fields = [Field("note", "note", "", "blank keeps the note; e.g. ioniser off")]
    if choices:
        fields.insert(0, Field("value", f"new value ({s.display_unit})", "", "blank keeps the value", ENTRY_PATTERN))
    return FormScreen(
        f"Edit at {s.where}",
        fields,
        submit,
        explain="Changes the highlighted reading (Shift+Tab to the list to pick another); "
        "the old row stays in the file." if choices
        else "No reading here yet: the note goes into the survey log.",
        choices=choices,
        check="mark doubtful (flag for re-check)",
        form_id="edit-form",
    )


def conditions_form(s: WalkSession, warn_dry: Callable[[float], None]) -> FormScreen:
    """Note relative humidity and temperature; ``warn_dry(rh)`` is called for dry air."""
    last = s.last_conditions

    def submit(values: dict[str, str]) -> str:
        rh, temp = parse_conditions(values["rh"], values["temp"])
        s.add_conditions(rh, temp, values["note"].strip())
        msg = "saved conditions " + " · ".join(
            part for part in (f"RH {rh:g} %" if rh is not None else "",
                              f"{temp:g} °C" if temp is not None else "") if part
        )
        if rh is not None and rh < DRY_AIR_RH_PERCENT:
            msg += f" · DRY AIR (below {DRY_AIR_RH_PERCENT:g} %): expect high charging"
            warn_dry(rh)
        return msg

    every = int(s.conditions_every / timedelta(minutes=1))
    return FormScreen(
        "Conditions",
        [
            Field("rh", "relative humidity, %", placeholder="e.g. 45"),
            Field("temp", "air temperature, °C", placeholder="e.g. 21.5"),
            Field("note", "note (optional)", placeholder="e.g. ionisers on, doors closed"),
        ],
        submit,
        explain=(
            f"Asked at the start and every {every} min. Below {DRY_AIR_RH_PERCENT:g} % RH "
            "charging rises sharply. Esc skips."
            + (f"\nLast: RH {last.rh_percent} %, {last.temperature_c} °C" if last else "")
        ),
        form_id="conditions-form",
    )


def settings_form(s: WalkSession, refit: Callable[[], None]) -> FormScreen:
    """Change the action level and the display unit (saved in the survey file)."""

    def submit(values: dict[str, str]) -> str:
        unit = canonical_unit(values["unit"].strip() or s.display_unit)
        threshold_text = values["threshold"].strip()
        if threshold_text:
            s.set_threshold(threshold_text)
        if unit != s.display_unit:
            s.set_display_unit(unit)
        refit()
        return (f"threshold {format_field(s.threshold_v_per_m, s.display_unit, 4)}, "
                f"display unit {s.display_unit}")

    return FormScreen(
        "Settings",
        [
            Field("threshold", f"threshold (action level; {s.display_unit} unless a unit is typed)",
                  format_field(s.threshold_v_per_m, s.display_unit, 4)),
            Field("unit", f"display unit: one of {', '.join(FIELD_UNITS)}", s.display_unit),
        ],
        submit,
        explain="Saved in the survey file. The limits are defaults; the site's ESD control plan decides.",
        form_id="settings-form",
    )


__all__ = ["conditions_form", "edit_form", "free_form", "jump_form", "settings_form"]
