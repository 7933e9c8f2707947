"""The coordinate reference system things leave the tool in, and the move from site metres into it.

A georeferenced site exports in its projected CRS (named in the site file, or the UTM zone chosen
from its control points), moved there by the fitted similarity transform of
:class:`~mapper.site.georef.Georef`. A local site exports in an engineering CRS in site metres
(:data:`~mapper.site.georef.LOCAL_CRS_WKT`), so every layer and the raster still carry a CRS.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import shapely
from pyproj import CRS, Transformer
from shapely import affinity
from shapely.geometry.base import BaseGeometry

from mapper.site.georef import LOCAL_CRS_WKT, Georef
from mapper.site.model import Site


@dataclass(frozen=True)
class ExportCRS:
    """Where exported coordinates live.

    Attributes
    ----------
    crs : pyproj.CRS
        The export CRS (projected, or the local engineering CRS), axes in metres.
    georef : Georef or None
        Transform from site metres to ``crs``; ``None`` for a local site (identity).
    """

    crs: CRS
    georef: Georef | None = None

    @property
    def georeferenced(self) -> bool:
        """True when coordinates are in a real projected CRS."""
        return self.georef is not None

    @property
    def name(self) -> str:
        """Short name, e.g. ``EPSG:32633`` or ``mapper local site grid``."""
        code = self.crs.to_authority()
        return f"{code[0]}:{code[1]}" if code else self.crs.name

    @property
    def wkt(self) -> str:
        """WKT2 text of the CRS."""
        return self.crs.to_wkt()

    def affine(self) -> list[float]:
        """``[a, b, d, e, xoff, yoff]`` for :func:`shapely.affinity.affine_transform`."""
        return self.georef.affine_shapely() if self.georef else [1.0, 0.0, 0.0, 1.0, 0.0, 0.0]

    def geometry(self, geom: BaseGeometry) -> BaseGeometry:
        """A geometry in site metres moved into the export CRS."""
        return geom if self.georef is None else affinity.affine_transform(geom, self.affine())

    def points(self, x, y) -> tuple[np.ndarray, np.ndarray]:
        """Site metres (arrays or scalars) to export CRS coordinates, metres."""
        if self.georef is None:
            return np.asarray(x, dtype=float), np.asarray(y, dtype=float)
        return self.georef.forward(x, y)

    def site_north(self, x: float, y: float, step_m: float = 10.0) -> tuple[float, float]:
        """Unit vector pointing to true north at a site position, in site axes.

        Found numerically (site -> CRS -> WGS 84, a step north, and back), so it includes the
        site's rotation and the projection's meridian convergence. ``(0, 1)`` for a local site.
        """
        if self.georef is None:
            return 0.0, 1.0
        e, n = self.georef.forward(x, y)
        to_ll = Transformer.from_crs(self.crs, "EPSG:4326", always_xy=True)
        from_ll = Transformer.from_crs("EPSG:4326", self.crs, always_xy=True)
        lon, lat = to_ll.transform(float(e), float(n))
        e2, n2 = from_ll.transform(lon, lat + step_m / 111_320.0)
        x2, y2 = self.georef.inverse(e2, n2)
        dx, dy = float(x2) - x, float(y2) - y
        length = float(np.hypot(dx, dy))
        return dx / length, dy / length


def export_crs(site: Site) -> ExportCRS:
    """The export CRS of a site.

    Parameters
    ----------
    site : Site
        A site; georeferenced sites carry ``site.georef``.

    Returns
    -------
    ExportCRS
    """
    if site.georef is not None:
        return ExportCRS(CRS.from_user_input(site.georef.crs), site.georef)
    return ExportCRS(CRS.from_wkt(LOCAL_CRS_WKT), None)


def affine_xy(ecrs: ExportCRS, x, y) -> tuple[np.ndarray, np.ndarray]:
    """Site metres (arrays) to export CRS coordinates by the same arithmetic as
    :func:`shapely.affinity.affine_transform` (``x' = a x + b y + xoff``), so geometries moved
    one at a time or all at once get the same coordinates to the last bit."""
    x = np.asarray(x, dtype=float)
    y = np.asarray(y, dtype=float)
    if ecrs.georef is None:
        return x, y
    a, b, d, e, xoff, yoff = ecrs.affine()
    return a * x + b * y + xoff, d * x + e * y + yoff


def transform_all(geoms, ecrs: ExportCRS) -> np.ndarray:
    """Move a sequence of site-metre geometries into the export CRS, all at once.

    Returns
    -------
    ndarray of shapely geometries
        In input order; empty geometries stay empty.
    """
    arr = np.empty(len(geoms), dtype=object)
    arr[:] = list(geoms)
    if ecrs.georef is None or not len(arr):
        return arr

    def move(coords: np.ndarray) -> np.ndarray:
        xp, yp = affine_xy(ecrs, coords[:, 0], coords[:, 1])
        return np.column_stack([xp, yp, *coords.T[2:]])  # a height, if any, is kept

    return shapely.transform(arr, move, include_z=None)


__all__ = ["ExportCRS", "affine_xy", "export_crs", "transform_all"]
