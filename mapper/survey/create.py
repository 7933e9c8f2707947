"""Making a new survey: load the site, plan the grid, create the file."""

from __future__ import annotations

from collections.abc import Mapping
from pathlib import Path

from mapper.errors import MapperError
from mapper.plan.grid import DEFAULT_SPACING_M, plan_grid
from mapper.site.site_file import load_site
from mapper.survey.store import Survey
from mapper.textfile import read_utf8
from mapper.units import SIGN_CONVENTIONS, canonical_unit, to_si

#: Default action level: 125 V/in (ANSI/ESD S20.20-2014 cl. 8.3.1 value), in V/m.
DEFAULT_THRESHOLD_V_PER_M = to_si(125.0, "V/in")


def create_survey(
    survey_path: str | Path,
    site_path: str | Path,
    *,
    spacing_m: float = DEFAULT_SPACING_M,
    layout: str = "square",
    display_unit: str = "V/m",
    sign_convention: str = "physics",
    threshold_v_per_m: float = DEFAULT_THRESHOLD_V_PER_M,
    roles: Mapping[str, str] | None = None,
    operator: str = "",
    site_units: str = "m",
    site_crs: str | None = None,
    control_points: str | Path | None = None,
) -> Survey:
    """Create a survey file from a site file and open it for writing.

    Parameters
    ----------
    survey_path : str or Path
        New survey file.
    site_path : str or Path
        TOML site file or vector file.
    spacing_m : float
        Grid spacing, metres.
    layout : str
        ``square`` or ``staggered``.
    display_unit : str
        Field unit for entry and output.
    sign_convention : str
        ``physics`` (field positive upward) or ``atmospheric`` (fair weather positive).
    threshold_v_per_m : float
        Action level, V/m.
    roles : mapping, optional
        Vector-file layer roles.
    operator : str
        Who surveys.
    site_units : str
        Length unit of a vector site file without a CRS (CAD drawings).
    site_crs : str, optional
        Projected CRS a drawing without one is drawn in (its units are the drawing's).
    control_points : str or Path, optional
        CSV ``x,y,lon,lat`` georeferencing a drawing without a CRS.
    """

    if sign_convention not in SIGN_CONVENTIONS:
        raise MapperError(f"unknown sign convention {sign_convention!r}; accepted: {', '.join(SIGN_CONVENTIONS)}")
    site = load_site(site_path, roles, site_units, site_crs=site_crs, control_points=control_points)
    plan = plan_grid(site, spacing_m, layout)
    site_path = Path(site_path)
    text = read_utf8(site_path, "site file") if site_path.suffix.lower() == ".toml" else None
    return Survey.create(
        survey_path,
        site,
        plan,
        display_unit=canonical_unit(display_unit),
        sign_convention=sign_convention,
        threshold_v_per_m=threshold_v_per_m,
        site_text=text,
        operator=operator,
    )
