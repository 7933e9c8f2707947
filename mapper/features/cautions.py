"""Cautions shown wherever findings are shown: the CLI, the report, the terminal app and the docs.

The wording is ours; the facts are listed with their sources in the project's reference values
(IEC TS 60079-32-1 and NFPA 77 for static control in hazardous areas; Merceret et al., NASA
technical report 20130010056, for fields near storms).
"""

from __future__ import annotations

#: Statement printed beside every limit or keep-away check.
LIMITS_ARE_DEFAULTS = (
    "The limits used here are defaults; the site's own ESD control plan and local codes govern "
    "and override them."
)

#: The cautions, one sentence each, in the order they are shown.
CAUTIONS: tuple[str, ...] = (
    "A field reading is the field at the meter, not a surface potential or a charge; an isolated "
    "charged conductor can release far more energy in a discharge than its field suggests.",
    "In classified hazardous areas (flammable gases, vapours, dusts) static control follows "
    "IEC TS 60079-32-1 and NFPA 77; the meter must be certified for the zone and the work needs a "
    "permit. Passing an ESD check does not make an area safe for flammable atmospheres.",
    "Outdoors, a field of 1-3 kV/m at ground can mean a thunderstorm within about 15 km "
    "(Merceret et al., NASA technical report 20130010056); a field map is no lightning warning: "
    "stop outdoor work when lightning is near and follow the site's lightning procedure.",
    LIMITS_ARE_DEFAULTS,
)

__all__ = ["CAUTIONS", "LIMITS_ARE_DEFAULTS"]
