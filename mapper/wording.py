"""Small helpers for the words every shell prints: counts with the right plural, local times."""

from __future__ import annotations

#: Plurals that are not the noun plus "s".
_IRREGULAR = {"hotspot change": "hotspot changes", "reading box": "reading boxes", "match": "matches"}


def plural(count: int, noun: str, many: str | None = None) -> str:
    """``"1 zone"``, ``"2 zones"``, ``"0 hotspots"``: a count with its noun in the right number.

    Parameters
    ----------
    count : int
        How many.
    noun : str
        The singular noun (may be several words: ``"condition note"``).
    many : str, optional
        The plural when it is not ``noun + "s"``.
    """
    if count == 1:
        return f"1 {noun}"
    return f"{count} {many or _IRREGULAR.get(noun) or noun + 's'}"


def local_span(span, timezone: str | None) -> str:
    """A survey's time span in the site's local time with its UTC offset (times stay UTC in the
    data), or in UTC when the site has no ``timezone``.

    Parameters
    ----------
    span : (datetime, datetime)
        First and last time, timezone-aware.
    timezone : str or None
        IANA name, e.g. ``"Europe/Berlin"``.
    """
    if timezone:
        from zoneinfo import ZoneInfo

        zone = ZoneInfo(timezone)
        a, b = span[0].astimezone(zone), span[1].astimezone(zone)
        offset = a.strftime("%z")
        where = f"{timezone} (UTC{offset[:3]}:{offset[3:]})"
    else:
        from datetime import UTC

        a, b = span[0].astimezone(UTC), span[1].astimezone(UTC)
        where = "UTC"
    end = f"{b:%H:%M}" if a.date() == b.date() else f"{b:%Y-%m-%d %H:%M}"
    return f"{a:%Y-%m-%d %H:%M}–{end} {where}"


__all__ = ["local_span", "plural"]
