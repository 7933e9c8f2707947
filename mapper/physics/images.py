"""Charges over a grounded floor by the method of images (Griffiths, Introduction to
Electrodynamics, sec. 3.2.1): a charge q at height h above a grounded conducting plane gives, for
z >= 0, the same field as q together with an image -q at depth h.

Used to make the sample sites' readings and to check the mapping stages against closed forms.
Coordinates in metres, charges in coulombs, line densities in C/m, area densities in C/m², fields
in V/m. ``field_z`` is the vertical component, positive upward (physics sign convention).
"""

from __future__ import annotations

from collections.abc import Iterable
from dataclasses import dataclass

import numpy as np

#: Vacuum permittivity, F/m (CODATA 2018).
EPSILON_0 = 8.8541878128e-12
_K = 1.0 / (4.0 * np.pi * EPSILON_0)


@dataclass(frozen=True)
class PointCharge:
    """A point charge.

    Attributes
    ----------
    x, y : float
        Position over the floor, metres.
    h : float
        Height above the grounded floor, metres (> 0).
    q : float
        Charge, coulombs.
    """

    x: float
    y: float
    h: float
    q: float

    def nodes(self) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
        """Quadrature nodes ``(x, y, h, q)`` standing for this source."""
        return np.array([self.x]), np.array([self.y]), np.array([self.h]), np.array([self.q])


@dataclass(frozen=True)
class LineCharge:
    """A straight uniformly charged line (a belt edge, a cable), discretised by Gauss-Legendre.

    Attributes
    ----------
    x0, y0, x1, y1 : float
        End points over the floor, metres.
    h : float
        Height above the floor, metres.
    density_c_per_m : float
        Line charge density, C/m.
    nodes_per_m : int
        Quadrature nodes per metre of length.
    """

    x0: float
    y0: float
    x1: float
    y1: float
    h: float
    density_c_per_m: float
    nodes_per_m: int = 20

    def nodes(self):
        length = float(np.hypot(self.x1 - self.x0, self.y1 - self.y0))
        n = max(8, int(np.ceil(length * self.nodes_per_m)))
        t, w = np.polynomial.legendre.leggauss(n)
        s = (t + 1) / 2
        x = self.x0 + s * (self.x1 - self.x0)
        y = self.y0 + s * (self.y1 - self.y0)
        return x, y, np.full(n, self.h), w / 2 * length * self.density_c_per_m


@dataclass(frozen=True)
class AreaCharge:
    """A uniformly charged horizontal rectangle (a charged floor patch or table top).

    Attributes
    ----------
    x0, y0, x1, y1 : float
        Opposite corners, metres.
    h : float
        Height above the grounded floor, metres (the thickness of an insulating layer on it).
    density_c_per_m2 : float
        Surface charge density, C/m².
    nodes_per_m : int
        Quadrature nodes per metre along each side.
    """

    x0: float
    y0: float
    x1: float
    y1: float
    h: float
    density_c_per_m2: float
    nodes_per_m: int = 12

    def nodes(self):
        lx, ly = abs(self.x1 - self.x0), abs(self.y1 - self.y0)
        nx = max(6, int(np.ceil(lx * self.nodes_per_m)))
        ny = max(6, int(np.ceil(ly * self.nodes_per_m)))
        tx, wx = np.polynomial.legendre.leggauss(nx)
        ty, wy = np.polynomial.legendre.leggauss(ny)
        gx = self.x0 + (tx + 1) / 2 * (self.x1 - self.x0)
        gy = self.y0 + (ty + 1) / 2 * (self.y1 - self.y0)
        xx, yy = np.meshgrid(gx, gy)
        ww = np.outer(wy, wx) / 4 * lx * ly * self.density_c_per_m2
        return xx.ravel(), yy.ravel(), np.full(xx.size, self.h), ww.ravel()


Source = PointCharge | LineCharge | AreaCharge


def field_z(sources: Iterable[Source], x, y, z) -> np.ndarray:
    """Vertical field of charges over a grounded plane, with their images, V/m.

    Parameters
    ----------
    sources : iterable of PointCharge, LineCharge, AreaCharge
        Charges above the plane z = 0.
    x, y : array_like
        Observation positions, metres (broadcast together).
    z : float or array_like
        Observation height above the plane, metres (>= 0).

    Returns
    -------
    ndarray
        E_z, V/m, positive upward.
    """
    x, y, z = np.broadcast_arrays(np.asarray(x, float), np.asarray(y, float), np.asarray(z, float))
    fx, fy, fz = (np.ascontiguousarray(a).ravel() for a in (x, y, z))
    out = np.zeros(fx.shape)
    for source in sources:
        sx, sy, sh, sq = source.nodes()
        out += unit_kernel(sx, sy, sh, sq, fx, fy, fz)  # node weights are the charges themselves
    return out.reshape(x.shape)


def unit_kernel(sx, sy, sh, w, x, y, z) -> np.ndarray:
    """Vertical field at observers of weighted unit charges over a grounded plane, V/m per C.

    ``sum_n w_n k [(z - h_n) / R1^3 - (z + h_n) / R2^3]`` for each observer: the charge at height
    ``h_n`` and its image at ``-h_n`` (Griffiths, Introduction to Electrodynamics, sec. 3.2.1).

    Parameters
    ----------
    sx, sy, sh : ndarray, shape (k,)
        Quadrature nodes of the source: position over the floor and height, metres.
    w : ndarray, shape (k,)
        Node weights (a share of the source's total charge, dimensionless).
    x, y, z : ndarray, shape (m,)
        Observers: position and height above the floor, metres.

    Returns
    -------
    ndarray, shape (m,)
        E_z per coulomb of total charge, V/m/C, positive upward.
    """
    out = np.empty(x.shape[0])
    step = max(1, 2**20 // max(sx.shape[0], 1))
    for start in range(0, x.shape[0], step):
        sl = slice(start, start + step)
        dx = x[sl, None] - sx[None, :]
        dy = y[sl, None] - sy[None, :]
        r2 = dx * dx + dy * dy
        above = z[sl, None] - sh[None, :]
        below = z[sl, None] + sh[None, :]
        out[sl] = (above / (r2 + above * above) ** 1.5 - below / (r2 + below * below) ** 1.5) @ w
    return _K * out


def induced_surface_charge(q: float, h: float, r) -> np.ndarray:
    """Closed-form induced surface charge density on the grounded plane, C/m².

    ``sigma = -q h / (2 pi (r^2 + h^2)^(3/2))`` (Griffiths, Introduction to Electrodynamics,
    eq. 3.10).

    Parameters
    ----------
    q : float
        Charge, coulombs.
    h : float
        Its height above the plane, metres.
    r : array_like
        Horizontal distance from the charge's foot, metres.
    """
    r = np.asarray(r, float)
    return -q * h / (2 * np.pi * (r * r + h * h) ** 1.5)
