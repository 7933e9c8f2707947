"""The ``mapper`` sub-commands: name, module and one-line help, importable without the numerical stack.

``mapper --help`` lists these without importing any sub-command module; a command's own module
(and what it needs) is imported only when that command runs.
"""

from __future__ import annotations

#: Sub-commands in the order ``mapper --help`` lists them: name -> (module in ``mapper.cli``, help).
COMMANDS: dict[str, tuple[str, str]] = {
    'new': ('cmd_new', 'create a survey from a site file and plan its walking grid'),
    'import': ('cmd_import', 'import readings (or condition notes) from a CSV or GIS point layer, all or nothing'),
    'info': ('cmd_info', "show a survey's site, plan, readings and conditions"),
    'meter': ('cmd_meter', 'meter profiles and calibration checks'),
    'review': ('cmd_review', 'list readings flagged for review; exclude a reading from the map or bring it back'),
    'grid': ('cmd_grid', 'interpolate the corrected readings (kriging, RBF or IDW) and store the field model'),
    'hotspots': ('cmd_hotspots', 'list hotspots, keep-away violations and where to measure next'),
    'sources': ('cmd_sources', 'list the likely charged objects (physical field model), largest first'),
    'compare': ('cmd_compare', 'compare two surveys of one site (before / after a change)'),
    'export': ('cmd_export', 'write a GeoPackage (readings, site, zones, assets, contours, bands, hotspots, advice) '
                             'and a GeoTIFF of the field beside it'),
    'report': ('cmd_report', 'write a PDF report: the field map, the findings and the cautions'),
    'archive': ('cmd_archive', 'the shared survey archive on PostgreSQL/PostGIS (init, push, list, pull, history)'),
    'demo': ('cmd_demo', 'run everything on the bundled indoor sample site'),
    'walk': ('cmd_walk', 'walk the grid in a terminal app: record readings, watch the live map'),
}


def summary(name: str) -> str:
    """The one-line help of a sub-command."""
    return COMMANDS[name][1]


__all__ = ["COMMANDS", "summary"]
