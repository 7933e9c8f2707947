"""The source inventory: the physical field model's charged objects as map features.

:func:`source_records` turns the ``physics`` entry of a :class:`~mapper.field.model.FieldGrid`'s
parameters into rows (ids ``S1``, ``S2`` ... by decreasing peak field) that the ``sources``
command, the GeoPackage ``sources`` layer and the report share.
"""

from __future__ import annotations

import shapely

from mapper.field.model import FieldGrid
from mapper.site.model import Site

#: What a survey of the vertical field at one height cannot tell about its sources (our own
#: wording of standard electrostatics: Griffiths, Introduction to Electrodynamics, ch. 2-3).
LIMITATIONS: tuple[str, ...] = (
    "A charged insulator and a conductor held at a potential give the same kind of field; the "
    "survey cannot tell which an object is.",
    "For a source lying on or near the floor, the image charge nearly cancels it: its sign and "
    "place are well determined, its charge much less so.",
    "Grounded objects other than the floor (racks, machine frames) distort the field and are not "
    "modelled; sources near them are placed less reliably.",
    "A source's charge and height are fitted together; a large charge standard error means the "
    "readings do not pin it down: take readings closer to it.",
)
#: A source whose charge standard error exceeds this share of its charge is "poorly determined"
#: (our own choice, no source).
POORLY_DETERMINED = 0.5


def source_records(grid: FieldGrid | None, site: Site | None = None) -> list[dict]:
    """Rows of the source inventory, largest |peak field| first.

    Parameters
    ----------
    grid : FieldGrid or None
        A field model; only ``physics`` models have sources (others give an empty list).
    site : Site, optional
        Unused today; kept so callers pass the site the sources belong to.

    Returns
    -------
    list of dict
        Keys ``source_id``, ``kind``, ``asset``, ``charge_c``, ``charge_std_c``, ``height_m``,
        ``height_std_m``, ``peak_v_per_m``, ``status``, ``position_std_m``, ``x_m``, ``y_m``
        (a point on the source, site metres), ``well_determined`` and ``geometry`` (shapely,
        site metres).
    """
    phys = None if grid is None or grid.settings is None else grid.settings.physics
    if phys is None:
        return []
    out = []
    rows = sorted(phys.sources, key=lambda s: -abs(s.peak_v_per_m))
    for k, s in enumerate(rows, start=1):
        geom = shapely.from_wkt(s.wkt)
        p = geom if geom.geom_type == "Point" else geom.representative_point()
        q, qs = s.charge_c, s.charge_std_c
        determined = abs(qs) <= POORLY_DETERMINED * abs(q) if q else False
        out.append({
            "source_id": f"S{k}",
            "kind": s.kind,
            "asset": s.asset,
            "charge_c": q,
            "charge_std_c": qs,
            "height_m": s.height_m,
            "height_std_m": s.height_std_m,
            "peak_v_per_m": s.peak_v_per_m,
            "status": s.status + ("" if determined else ", poorly determined"),
            "position_std_m": s.position_std_m,
            "x_m": float(p.x),
            "y_m": float(p.y),
            "well_determined": bool(determined),
            "wkt": s.wkt,
        })
    return out


__all__ = ["LIMITATIONS", "POORLY_DETERMINED", "source_records"]
