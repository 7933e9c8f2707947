"""Georeference: a least-squares similarity transform from site metres to a projected CRS."""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np

from mapper.errors import MapperError

#: Control-point RMS above which the fit is reported as doubtful, metres (common practice, no source).
RMS_WARN_M = 0.2

#: An engineering (local) CRS in metres for sites without a georeference.
LOCAL_CRS_WKT = (
    'ENGCRS["mapper local site grid",EDATUM["site origin"],'
    'CS[Cartesian,2],AXIS["easting (x)",east,ORDER[1],LENGTHUNIT["metre",1]],'
    'AXIS["northing (y)",north,ORDER[2],LENGTHUNIT["metre",1]]]'
)


@dataclass(frozen=True)
class Georef:
    """Similarity transform ``E = a x - b y + tx``, ``N = b x + a y + ty``.

    Attributes
    ----------
    crs : str
        Target projected CRS, e.g. ``"EPSG:32632"``.
    a, b : float
        ``scale * cos(rotation)`` and ``scale * sin(rotation)``, dimensionless.
    tx, ty : float
        Translation, metres in the target CRS.
    residuals_m : tuple of float
        Distance between each control point's projected position and where the fit puts it, m.
    """

    crs: str
    a: float
    b: float
    tx: float
    ty: float
    residuals_m: tuple[float, ...] = ()

    @property
    def scale(self) -> float:
        """Scale factor from site metres to CRS metres."""
        return math.hypot(self.a, self.b)

    @property
    def rotation_deg(self) -> float:
        """Rotation of the site's x axis from the CRS easting axis, degrees counter-clockwise."""
        return math.degrees(math.atan2(self.b, self.a))

    @property
    def rms_m(self) -> float:
        """Root-mean-square control point residual, metres."""
        r = np.asarray(self.residuals_m, dtype=float)
        return float(np.sqrt(np.mean(r**2))) if r.size else 0.0

    def forward(self, x, y):
        """Site metres to CRS coordinates (arrays or scalars)."""
        x = np.asarray(x, dtype=float)
        y = np.asarray(y, dtype=float)
        return self.a * x - self.b * y + self.tx, self.b * x + self.a * y + self.ty

    def inverse(self, e, n):
        """CRS coordinates to site metres (arrays or scalars)."""
        e = np.asarray(e, dtype=float) - self.tx
        n = np.asarray(n, dtype=float) - self.ty
        s2 = self.a**2 + self.b**2
        return (self.a * e + self.b * n) / s2, (-self.b * e + self.a * n) / s2

    def to_dict(self) -> dict:
        """JSON-ready form."""
        return {
            "crs": self.crs,
            "a": self.a,
            "b": self.b,
            "tx": self.tx,
            "ty": self.ty,
            "residuals_m": list(self.residuals_m),
        }

    @classmethod
    def from_dict(cls, data: dict) -> Georef:
        """Inverse of :meth:`to_dict`."""
        return cls(data["crs"], data["a"], data["b"], data["tx"], data["ty"], tuple(data["residuals_m"]))

    def affine_shapely(self) -> list[float]:
        """Coefficients for :func:`shapely.affinity.affine_transform`."""
        return [self.a, -self.b, self.b, self.a, self.tx, self.ty]


def utm_crs_for(lon: float, lat: float) -> str:
    """The WGS 84 UTM zone CRS (``"EPSG:326xx"``/``"EPSG:327xx"``) containing a position.

    Parameters
    ----------
    lon, lat : float
        WGS 84 longitude and latitude, degrees.
    """
    from pyproj.aoi import AreaOfInterest  # pyproj only when fitting: reading a site needs none
    from pyproj.database import query_utm_crs_info

    infos = query_utm_crs_info(
        datum_name="WGS 84",
        area_of_interest=AreaOfInterest(lon, lat, lon, lat),
    )
    if not infos:
        raise MapperError(f"no UTM zone found for lon {lon}, lat {lat}")
    return f"{infos[0].auth_name}:{infos[0].code}"


def fit_similarity(
    site_xy: Sequence[tuple[float, float]],
    lonlat: Sequence[tuple[float, float]],
    crs: str | None = None,
) -> Georef:
    """Fit the similarity transform from site metres to a projected CRS by least squares.

    Parameters
    ----------
    site_xy : sequence of (x, y)
        Control point positions in site metres.
    lonlat : sequence of (lon, lat)
        The same points in WGS 84 degrees.
    crs : str, optional
        Projected target CRS; default: the UTM zone of the control points' centre.

    Returns
    -------
    Georef
        The fitted transform with per-point residuals in metres.
    """
    from pyproj import CRS, Transformer

    xy = np.asarray(site_xy, dtype=float)
    ll = np.asarray(lonlat, dtype=float)
    if len(xy) < 2:
        raise MapperError("a georeference needs at least 2 control points")
    if not (np.isfinite(xy).all() and np.isfinite(ll).all()):
        raise MapperError("a control point has a coordinate that is not a finite number (nan or inf)")
    if np.ptp(xy, axis=0).max() <= 0:
        raise MapperError("control points all have the same site position; they must be apart")
    if crs is None:
        crs = utm_crs_for(float(ll[:, 0].mean()), float(ll[:, 1].mean()))
    try:
        target = CRS.from_user_input(crs)
    except Exception as exc:  # pyproj raises CRSError with a long message
        raise MapperError(f"unknown CRS {crs!r}: {str(exc).splitlines()[0]}") from None
    if not target.is_projected:
        raise MapperError(f"CRS {crs!r} is not projected; give a projected CRS in metres (e.g. a UTM zone)")
    to_proj = Transformer.from_crs("EPSG:4326", target, always_xy=True)
    e, n = to_proj.transform(ll[:, 0], ll[:, 1])
    x, y = xy[:, 0], xy[:, 1]
    ones, zeros = np.ones_like(x), np.zeros_like(x)
    design = np.vstack(
        [np.column_stack([x, -y, ones, zeros]), np.column_stack([y, x, zeros, ones])]
    )
    rhs = np.concatenate([e, n])
    # Centre the unknowns for conditioning: large UTM offsets otherwise dominate.
    e0, n0 = float(np.mean(e)), float(np.mean(n))
    rhs_c = rhs - np.concatenate([np.full_like(e, e0), np.full_like(n, n0)])
    (a, b, tx, ty), *_ = np.linalg.lstsq(design, rhs_c, rcond=None)
    tx, ty = tx + e0, ty + n0
    fe, fn = a * x - b * y + tx, b * x + a * y + ty
    residuals = tuple(float(r) for r in np.hypot(fe - e, fn - n))
    scale = float(np.hypot(a, b))
    if not np.isfinite([e, n]).all() or not np.isfinite(scale):
        raise MapperError("the control points' lon/lat cannot be projected; check for swapped lon and lat")
    if np.ptp(np.column_stack([e, n]), axis=0).max() <= 1e-6:
        raise MapperError("control points all have the same lon/lat; they must be apart on the ground")
    if scale < 1e-3 or scale > 1e3:
        raise MapperError(f"the control points give a scale of {scale:.3g} map metres per site metre; "
                          "check the site units and that lon/lat belong to the right x, y")
    return Georef(crs=target.to_string(), a=float(a), b=float(b), tx=float(tx), ty=float(ty), residuals_m=residuals)
