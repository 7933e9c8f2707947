"""Defaults the whole tool shares, each defined once here."""

from __future__ import annotations

from mapper.units import INCH_M

#: Default survey-wide action level: 125 V/in = 4921.26 V/m, the field above which ANSI/ESD
#: S20.20-2014 cl. 8.3.1 asks insulators near ESD-sensitive items to be kept apart or neutralised.
#: The site's own ESD control plan sets its level; this is only the default.
DEFAULT_THRESHOLD_V_PER_M = 125.0 / INCH_M

__all__ = ["DEFAULT_THRESHOLD_V_PER_M"]
