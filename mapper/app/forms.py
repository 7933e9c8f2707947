"""Small modal forms: conditions, jump to a point, free position, note, edit, settings.

One :class:`FormScreen` serves them all: a title, an explanation, optional choices (an option
list), text fields and an optional check box. Enter moves to the next field and, on the last,
submits to a callback; a refused entry keeps the form open with the reason shown in place, so
nothing is saved until the callback has returned. Esc closes without saving.
"""

from __future__ import annotations

from collections.abc import Callable, Sequence
from dataclasses import dataclass

from textual import on
from textual.app import ComposeResult
from textual.binding import Binding
from textual.containers import Horizontal, Vertical
from textual.screen import ModalScreen
from textual.widgets import Checkbox, Input, Label, OptionList, Static
from textual.widgets.option_list import Option

from mapper.errors import MapperError


@dataclass(frozen=True)
class Field:
    """A text field of a form.

    Attributes
    ----------
    name : str
        Key in the values passed to the callback.
    label : str
        Shown above the field.
    value : str
        Initial text.
    placeholder : str
        Hint shown while empty.
    restrict : str or None
        Regular expression the whole text must match while typing.
    """

    name: str
    label: str
    value: str = ""
    placeholder: str = ""
    restrict: str | None = None


class FormScreen(ModalScreen[str | None]):
    """A modal form. Dismisses with the callback's confirmation text, or ``None`` on Esc.

    Parameters
    ----------
    title : str
        Heading.
    fields : sequence of Field
        Text fields, in order.
    submit : callable
        Called with ``{name: text}`` (plus ``choice`` and ``check`` when present); returns the
        confirmation shown on the status line, or raises :class:`MapperError` to refuse.
    explain : str
        Text under the heading.
    choices : sequence of (str, str)
        ``(key, text)`` options; the highlighted key is passed as ``choice``.
    check : str or None
        Label of a check box, passed as ``check`` (``"1"`` or ``""``).
    form_id : str
        Id of the form container (for tests and styles).
    """

    CSS_PATH = "forms.tcss"
    BINDINGS = [Binding("escape", "cancel", "Close without saving")]

    def __init__(
        self,
        title: str,
        fields: Sequence[Field],
        submit: Callable[[dict[str, str]], str],
        *,
        explain: str = "",
        choices: Sequence[tuple[str, str]] = (),
        check: str | None = None,
        form_id: str = "form",
    ) -> None:
        super().__init__()
        self.form_title = title
        self.fields = tuple(fields)
        self.submit_cb = submit
        self.explain = explain
        self.choices = tuple(choices)
        self.check = check
        self.form_id = form_id

    def compose(self) -> ComposeResult:
        with Vertical(id=self.form_id, classes="form"):
            yield Label(self.form_title, classes="form-title")
            if self.explain:
                yield Static(self.explain, classes="form-explain")
            if self.choices:
                yield OptionList(*[Option(text, id=key) for key, text in self.choices], id="choices")
            for f in self.fields:
                with Horizontal(classes="form-row"):
                    yield Label(f.label, classes="form-label")
                    yield Input(value=f.value, placeholder=f.placeholder, restrict=f.restrict, id=f"field-{f.name}")
            if self.check is not None:
                yield Checkbox(self.check, id="check")
            yield Static("", id="form-error", classes="form-error")
            yield Static("Enter: next field / save · Esc: close without saving", classes="form-keys")

    def on_mount(self) -> None:
        if self.choices:
            self.query_one("#choices", OptionList).highlighted = 0
        if self.fields:
            self.query_one(f"#field-{self.fields[0].name}", Input).focus()
        elif self.choices:
            self.query_one("#choices", OptionList).focus()

    def values(self) -> dict[str, str]:
        """Current text of every field, with ``choice`` and ``check`` when present."""
        out = {f.name: self.query_one(f"#field-{f.name}", Input).value for f in self.fields}
        if self.choices:
            ol = self.query_one("#choices", OptionList)
            index = ol.highlighted if ol.highlighted is not None else 0
            out["choice"] = self.choices[index][0]
        if self.check is not None:
            out["check"] = "1" if self.query_one("#check", Checkbox).value else ""
        return out

    @on(Input.Submitted)
    def _next_or_submit(self, event: Input.Submitted) -> None:
        event.stop()
        names = [f"field-{f.name}" for f in self.fields]
        k = names.index(event.input.id) if event.input.id in names else len(names) - 1
        if k + 1 < len(names):
            self.query_one(f"#{names[k + 1]}", Input).focus()
            return
        self.save()

    @on(OptionList.OptionSelected, "#choices")
    def _choice_made(self, event: OptionList.OptionSelected) -> None:
        event.stop()
        if self.fields:
            self.query_one(f"#field-{self.fields[0].name}", Input).focus()
        else:
            self.save()

    def save(self) -> None:
        """Run the callback; close on success, show the reason in place on refusal."""
        try:
            message = self.submit_cb(self.values())
        except MapperError as exc:
            self.query_one("#form-error", Static).update(f"not saved: {exc}")
            return
        self.dismiss(message)

    def action_cancel(self) -> None:
        self.dismiss(None)
