"""What a field model was built with: typed settings of each method family and the shared parts.

:class:`FieldSettings` is carried by :class:`~mapper.field.model.FieldGrid` (``grid.settings``).
Its :meth:`FieldSettings.to_dict` gives the JSON object stored in survey files, written in the
GeoTIFF's tags and read back by :meth:`FieldSettings.from_dict`; the keys are those of the
``params`` object earlier versions stored, and models stored by earlier versions (which lack
some of today's keys) are read as well.

Dictionary layout (one flat object; the method family's keys first)::

    kriging, universal   variogram, variogram_text, variogram_fit, variogram_choice, neighbors,
                         nugget_as_error[, drift]   (models stored before 2026-12 also
                         hold share_m, the side of a removed approximate mode; it is ignored)
    rbf                  kernel, neighbors, smoothing
    idw                  power, neighbors
    physics              physics {sources, background ..., residual}[, prediction_height_m][, loo_split]
    rbf, idw             std_source, std_scale[, std_calibration, std_reference, std_local]
    every method         cell_m, n_readings, n_positions, repeatability_v_per_m, data_spacing_m, fast
"""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass, replace
from types import MappingProxyType
from typing import Any

from mapper.errors import MapperError
from mapper.field.variogram import Variogram

_WHERE = "field settings"


def _need(d: Mapping, key: str, what: str) -> Any:
    """``d[key]``, or a one-line error naming the missing key."""
    if not isinstance(d, Mapping):
        raise MapperError(f"{what} must be a JSON object, got {type(d).__name__}", where=_WHERE)
    if key not in d:
        raise MapperError(f"{what} lacks the key {key!r}", where=_WHERE)
    return d[key]


def _frozen_map(value: Mapping | None) -> Mapping:
    return MappingProxyType(dict(value or {}))


@dataclass(frozen=True)
class VariogramFitSummary:
    """How the variogram was fitted to the binned semivariance (:class:`~mapper.field.fit.VariogramFit`).

    Attributes
    ----------
    variogram : Variogram
        The fitted model (sill and nugget in (V/m)², range in metres).
    weights : str
        Weighting scheme of the least-squares fit (``cressie`` or ``pairs``).
    n_bins : int
        Lag bins used in the fit.
    rmse : float
        Root-mean-square difference model - empirical over the bins used, (V/m)².
    r2 : float
        Pair-weighted coefficient of determination of the fit (1 = perfect), dimensionless.
    converged : bool
        True when the optimiser reported convergence.
    estimator : str
        Empirical semivariance estimator (e.g. ``matheron``).
    pairs_sampled : bool
        True when the pairs were subsampled for the empirical variogram.
    """

    variogram: Variogram
    weights: str
    n_bins: int
    rmse: float
    r2: float
    converged: bool
    estimator: str
    pairs_sampled: bool

    @classmethod
    def of(cls, fit) -> VariogramFitSummary:
        """The summary of a :class:`~mapper.field.fit.VariogramFit`."""
        return cls.from_dict(fit.to_dict())

    def to_dict(self) -> dict:
        """JSON-ready form (the ``variogram_fit`` object)."""
        return {
            "variogram": self.variogram.to_dict(), "weights": self.weights, "n_bins": self.n_bins,
            "rmse": self.rmse, "r2": self.r2, "converged": self.converged, "estimator": self.estimator,
            "pairs_sampled": self.pairs_sampled,
        }

    @classmethod
    def from_dict(cls, d: Mapping) -> VariogramFitSummary:
        """Read :meth:`to_dict` output."""
        what = "variogram_fit"
        return cls(
            variogram=Variogram.from_dict(dict(_need(d, "variogram", what))), weights=_need(d, "weights", what),
            n_bins=_need(d, "n_bins", what), rmse=_need(d, "rmse", what), r2=_need(d, "r2", what),
            converged=_need(d, "converged", what), estimator=_need(d, "estimator", what),
            pairs_sampled=_need(d, "pairs_sampled", what),
        )


@dataclass(frozen=True)
class VariogramChoice:
    """Why the kept variogram model was chosen among those fitted.

    Attributes
    ----------
    by : str
        The criterion, as a phrase.
    loo_rmse_v_per_m : Mapping of str to float or None
        Leave-one-out RMSE of kriging with each fitted model, V/m (None: could not be cross-validated).
    r2 : Mapping of str to float
        Coefficient of determination of each model's fit to the binned semivariance, dimensionless.
    """

    by: str
    loo_rmse_v_per_m: Mapping[str, float | None]
    r2: Mapping[str, float]

    def __post_init__(self) -> None:
        object.__setattr__(self, "loo_rmse_v_per_m", _frozen_map(self.loo_rmse_v_per_m))
        object.__setattr__(self, "r2", _frozen_map(self.r2))

    def to_dict(self) -> dict:
        """JSON-ready form (the ``variogram_choice`` object)."""
        return {"by": self.by, "loo_rmse_v_per_m": dict(self.loo_rmse_v_per_m), "r2": dict(self.r2)}

    @classmethod
    def from_dict(cls, d: Mapping) -> VariogramChoice:
        """Read :meth:`to_dict` output."""
        what = "variogram_choice"
        return cls(by=_need(d, "by", what), loo_rmse_v_per_m=_need(d, "loo_rmse_v_per_m", what),
                   r2=_need(d, "r2", what))


@dataclass(frozen=True)
class KrigingSettings:
    """Ordinary or universal kriging: the variogram and the neighbourhood.

    Attributes
    ----------
    variogram : Variogram
        The variogram used (sill and nugget in (V/m)², range in metres).
    variogram_text : str
        The variogram in one line, for people.
    variogram_fit : VariogramFitSummary or None
        How it was fitted; None when it was given (used as is).
    variogram_choice : VariogramChoice or None
        Why this model among those fitted; None when given, on the fast path, or in models
        stored by versions that did not record it.
    neighbors : int or None
        Moving neighbourhood size, readings; None: every reading (global kriging).
    nugget_as_error : bool
        True when the nugget is treated as measurement error (smoothing); False: exact at the readings.
    drift : str or None
        Universal kriging's drift (``linear``); None for ordinary kriging.
    """

    variogram: Variogram
    variogram_text: str
    variogram_fit: VariogramFitSummary | None = None
    variogram_choice: VariogramChoice | None = None
    neighbors: int | None = None
    nugget_as_error: bool = False
    drift: str | None = None

    def reference_dict(self) -> dict:
        """The keys recorded for the kriging behind a borrowed standard deviation (``std_reference``)."""
        d = self.to_dict()
        return {"method": "kriging", **{k: d[k] for k in _REFERENCE_KEYS}}

    def to_dict(self) -> dict:
        """JSON-ready keys of the field settings."""
        d = {
            "variogram": self.variogram.to_dict(),
            "variogram_text": self.variogram_text,
            "variogram_fit": None if self.variogram_fit is None else self.variogram_fit.to_dict(),
            "variogram_choice": None if self.variogram_choice is None else self.variogram_choice.to_dict(),
            "neighbors": self.neighbors,
            "nugget_as_error": self.nugget_as_error,
        }
        if self.drift is not None:
            d["drift"] = self.drift
        return d

    @classmethod
    def from_dict(cls, d: Mapping, what: str = "kriging settings") -> KrigingSettings:
        """Read :meth:`to_dict` output (or :meth:`reference_dict` output)."""
        fit, choice = d.get("variogram_fit"), d.get("variogram_choice")
        return cls(
            variogram=Variogram.from_dict(dict(_need(d, "variogram", what))),
            variogram_text=_need(d, "variogram_text", what),
            variogram_fit=None if fit is None else VariogramFitSummary.from_dict(fit),
            variogram_choice=None if choice is None else VariogramChoice.from_dict(choice),
            neighbors=d.get("neighbors"),
            nugget_as_error=d.get("nugget_as_error", False),
            drift=d.get("drift"),
        )


#: Kriging keys recorded in ``std_reference``.
_REFERENCE_KEYS = ("variogram", "variogram_text", "variogram_fit", "variogram_choice", "neighbors")


@dataclass(frozen=True)
class RBFSettings:
    """Radial basis function interpolation.

    Attributes
    ----------
    kernel : str
        Radial kernel (``thin_plate_spline``).
    neighbors : int or None
        Nearest readings per prediction; None: every reading.
    smoothing : float or None
        Smoothing parameter of the fit, (V/m)² per unit kernel weight (0: exact at the readings).
    """

    kernel: str
    neighbors: int | None = None
    smoothing: float | None = None

    def to_dict(self) -> dict:
        """JSON-ready keys of the field settings."""
        return {"kernel": self.kernel, "neighbors": self.neighbors, "smoothing": self.smoothing}

    @classmethod
    def from_dict(cls, d: Mapping) -> RBFSettings:
        """Read :meth:`to_dict` output."""
        return cls(kernel=_need(d, "kernel", "rbf settings"), neighbors=d.get("neighbors"),
                   smoothing=d.get("smoothing"))


@dataclass(frozen=True)
class IDWSettings:
    """Inverse-distance weighting.

    Attributes
    ----------
    power : float
        Exponent of the inverse distance, dimensionless.
    neighbors : int or None
        Nearest readings per prediction; None: every reading.
    """

    power: float
    neighbors: int | None = None

    def to_dict(self) -> dict:
        """JSON-ready keys of the field settings."""
        return {"power": self.power, "neighbors": self.neighbors}

    @classmethod
    def from_dict(cls, d: Mapping) -> IDWSettings:
        """Read :meth:`to_dict` output."""
        return cls(power=_need(d, "power", "idw settings"), neighbors=d.get("neighbors"))


@dataclass(frozen=True)
class SourceSummary:
    """One charged object of the physical model, as stored.

    Attributes
    ----------
    kind : str
        ``point``, ``line`` or ``patch``.
    asset : str or None
        The site asset it sits on; None for a source found away from the assets.
    status : str
        ``asset`` or ``unlisted`` (a source the site file does not list).
    charge_c, charge_std_c : float
        Charge and its standard deviation, coulombs.
    height_m, height_std_m : float
        Height above the floor and its standard deviation, metres.
    peak_v_per_m : float
        Largest field it makes at the meter's height, V/m (physics sign).
    position_std_m : float or None
        Standard deviation of its position, metres (None when the position is the asset's).
    wkt : str
        Its geometry, site metres, as WKT.
    """

    kind: str
    asset: str | None
    status: str
    charge_c: float
    charge_std_c: float
    height_m: float
    height_std_m: float
    peak_v_per_m: float
    position_std_m: float | None
    wkt: str

    def to_dict(self) -> dict:
        """JSON-ready form (one item of ``physics.sources``)."""
        return {
            "kind": self.kind, "asset": self.asset, "status": self.status,
            "charge_c": self.charge_c, "charge_std_c": self.charge_std_c,
            "height_m": self.height_m, "height_std_m": self.height_std_m,
            "peak_v_per_m": self.peak_v_per_m, "position_std_m": self.position_std_m,
            "wkt": self.wkt,
        }

    @classmethod
    def from_dict(cls, d: Mapping) -> SourceSummary:
        """Read :meth:`to_dict` output."""
        what = "physics source"
        return cls(**{k: _need(d, k, what) for k in ("kind", "asset", "status", "charge_c", "charge_std_c",
                                                     "height_m", "height_std_m", "peak_v_per_m", "wkt")},
                   position_std_m=d.get("position_std_m"))


@dataclass(frozen=True)
class SplitStats:
    """Leave-one-out statistics of one group of readings.

    Attributes
    ----------
    n : int
        Readings in the group.
    rmse_v_per_m : float or None
        RMSE of their left-out predictions, V/m (None for an empty group).
    rms_standardized, mean_standardized : float or None
        RMS and mean of the errors divided by the predicted standard deviation, dimensionless.
    """

    n: int
    rmse_v_per_m: float | None
    rms_standardized: float | None
    mean_standardized: float | None

    def to_dict(self) -> dict:
        """JSON-ready form."""
        return {"n": self.n, "rmse_v_per_m": self.rmse_v_per_m, "rms_standardized": self.rms_standardized,
                "mean_standardized": self.mean_standardized}

    @classmethod
    def from_dict(cls, d: Mapping) -> SplitStats:
        """Read :meth:`to_dict` output."""
        return cls(n=_need(d, "n", "loo_split"), rmse_v_per_m=d.get("rmse_v_per_m"),
                   rms_standardized=d.get("rms_standardized"), mean_standardized=d.get("mean_standardized"))


@dataclass(frozen=True)
class LooSplit:
    """The physical model's leave-one-out statistics near the fitted sources and elsewhere.

    Attributes
    ----------
    near_sources : SplitStats
        Readings near a fitted source.
    quiet : SplitStats
        The other readings.
    """

    near_sources: SplitStats
    quiet: SplitStats

    def to_dict(self) -> dict:
        """JSON-ready form (the ``loo_split`` object)."""
        return {"near_sources": self.near_sources.to_dict(), "quiet": self.quiet.to_dict()}

    @classmethod
    def from_dict(cls, d: Mapping) -> LooSplit:
        """Read :meth:`to_dict` output."""
        return cls(near_sources=SplitStats.from_dict(_need(d, "near_sources", "loo_split")),
                   quiet=SplitStats.from_dict(_need(d, "quiet", "loo_split")))


@dataclass(frozen=True)
class PhysicsSettings:
    """The physical model: charged sources over a grounded floor, and the heights.

    Attributes
    ----------
    sources : tuple of SourceSummary
        The fitted charged objects.
    background_v_per_m : float
        Uniform background field at the meter's height, V/m.
    background_gradient_v_per_m2 : tuple of float
        Gradient of the background along x and y, V/m per metre.
    noise_floor_v_per_m : float
        Constant part of the meter error model, V/m.
    noise_share : float
        Part of the error proportional to the source field, dimensionless (0.01 = 1 %).
    meter_height_m : float
        Height of the readings above the floor, metres.
    residual : str
        The residual kriging's variogram in one line, or why there is none.
    prediction_height_m : float or None
        Height above the floor the map shows the field at, metres; None for a candidate not chosen.
    loo_split : LooSplit or None
        Leave-one-out statistics near the sources and elsewhere (None with fewer than 3 positions).
    """

    sources: tuple[SourceSummary, ...]
    background_v_per_m: float
    background_gradient_v_per_m2: tuple[float, float]
    noise_floor_v_per_m: float
    noise_share: float
    meter_height_m: float
    residual: str
    prediction_height_m: float | None = None
    loo_split: LooSplit | None = None

    def describe(self) -> dict:
        """The model's own description (the ``physics`` object)."""
        return {
            "sources": [s.to_dict() for s in self.sources],
            "background_v_per_m": self.background_v_per_m,
            "background_gradient_v_per_m2": list(self.background_gradient_v_per_m2),
            "noise_floor_v_per_m": self.noise_floor_v_per_m,
            "noise_share": self.noise_share,
            "meter_height_m": self.meter_height_m,
            "residual": self.residual,
        }

    def to_dict(self) -> dict:
        """JSON-ready keys of the field settings."""
        d: dict = {"physics": self.describe()}
        if self.prediction_height_m is not None:
            d["prediction_height_m"] = self.prediction_height_m
        if self.loo_split is not None:
            d["loo_split"] = self.loo_split.to_dict()
        return d

    @classmethod
    def from_description(cls, d: Mapping) -> PhysicsSettings:
        """From :meth:`~mapper.field.physical.PhysicalModel.describe` output (the ``physics`` object)."""
        what = "physics settings"
        return cls(
            sources=tuple(SourceSummary.from_dict(s) for s in _need(d, "sources", what)),
            background_v_per_m=_need(d, "background_v_per_m", what),
            background_gradient_v_per_m2=tuple(_need(d, "background_gradient_v_per_m2", what)),
            noise_floor_v_per_m=_need(d, "noise_floor_v_per_m", what),
            noise_share=_need(d, "noise_share", what),
            meter_height_m=_need(d, "meter_height_m", what),
            residual=_need(d, "residual", what),
        )

    @classmethod
    def from_dict(cls, d: Mapping) -> PhysicsSettings:
        """Read :meth:`to_dict` output."""
        split = d.get("loo_split")
        base = cls.from_description(_need(d, "physics", "physics settings"))
        return replace(base, prediction_height_m=d.get("prediction_height_m"),
                       loo_split=None if split is None else LooSplit.from_dict(split))


@dataclass(frozen=True)
class CalibrationStats:
    """Checks of a borrowed, calibrated standard deviation on the chosen method's leave-one-out errors.

    Attributes
    ----------
    n : int
        Leave-one-out errors used.
    mean_standardized : float or None
        Mean of the standardised errors, dimensionless (about 0 when unbiased).
    rms_standardized : float or None
        Their RMS, dimensionless (1 by construction).
    within_95 : float or None
        Share of them within +-1.96, dimensionless (about 0.95 for normal errors).
    """

    n: int
    mean_standardized: float | None
    rms_standardized: float | None
    within_95: float | None

    def to_dict(self) -> dict:
        """JSON-ready form (the ``std_calibration`` object)."""
        return {"n": self.n, "mean_standardized": self.mean_standardized,
                "rms_standardized": self.rms_standardized, "within_95": self.within_95}

    @classmethod
    def from_dict(cls, d: Mapping) -> CalibrationStats:
        """Read :meth:`to_dict` output."""
        return cls(n=_need(d, "n", "std_calibration"), mean_standardized=d.get("mean_standardized"),
                   rms_standardized=d.get("rms_standardized"), within_95=d.get("within_95"))


@dataclass(frozen=True)
class LocalScale:
    """How the borrowed standard deviation was scaled locally (:func:`~mapper.field.uncertainty.local_scale`).

    Attributes
    ----------
    neighbours : int
        Leave-one-out errors around a place that set its local scale.
    prior : float
        Weight of the site-wide scale in each local one, in readings' worth.
    c : float
        Factor that brings the standardised errors' RMS back to 1, dimensionless.
    min_factor, max_factor : float
        Smallest and largest local factor over the grid, dimensionless.
    """

    neighbours: int
    prior: float
    c: float
    min_factor: float
    max_factor: float

    def to_dict(self) -> dict:
        """JSON-ready form (the ``std_local`` object)."""
        return {"neighbours": self.neighbours, "prior": self.prior, "c": self.c, "min": self.min_factor,
                "max": self.max_factor}

    @classmethod
    def from_dict(cls, d: Mapping) -> LocalScale:
        """Read :meth:`to_dict` output."""
        what = "std_local"
        return cls(neighbours=_need(d, "neighbours", what), prior=_need(d, "prior", what), c=_need(d, "c", what),
                   min_factor=_need(d, "min", what), max_factor=_need(d, "max", what))


@dataclass(frozen=True)
class BorrowedStd:
    """Where the standard deviation of a method that gives none of its own (RBF, IDW) comes from.

    Attributes
    ----------
    source : str
        Where it comes from, as a sentence (``none: ...`` when there is none).
    scale : float or None
        Site-wide factor on ordinary kriging's standard deviation, dimensionless; None when
        there is no standard deviation.
    calibration : CalibrationStats or None
        Checks of the calibration; None when there is no standard deviation.
    reference : KrigingSettings or None
        The ordinary kriging whose standard deviation is borrowed.
    local : LocalScale or None
        The local scaling; None when there is none (or in models stored before it existed).
    """

    source: str
    scale: float | None = None
    calibration: CalibrationStats | None = None
    reference: KrigingSettings | None = None
    local: LocalScale | None = None

    def to_dict(self) -> dict:
        """JSON-ready keys of the field settings."""
        d: dict = {"std_source": self.source, "std_scale": self.scale}
        if self.calibration is not None:
            d["std_calibration"] = self.calibration.to_dict()
        if self.reference is not None:
            d["std_reference"] = self.reference.reference_dict()
        if self.local is not None:
            d["std_local"] = self.local.to_dict()
        return d

    @classmethod
    def from_dict(cls, d: Mapping) -> BorrowedStd | None:
        """Read :meth:`to_dict` output; None when ``d`` has no ``std_source`` (older stored models)."""
        if d.get("std_source") is None:
            return None
        cal, ref, local = d.get("std_calibration"), d.get("std_reference"), d.get("std_local")
        return cls(
            source=d["std_source"],
            scale=d.get("std_scale"),
            calibration=None if cal is None else CalibrationStats.from_dict(cal),
            reference=None if ref is None else KrigingSettings.from_dict(ref, "std_reference"),
            local=None if local is None else LocalScale.from_dict(local),
        )


#: Settings of one method family.
MethodSettings = KrigingSettings | RBFSettings | IDWSettings | PhysicsSettings
_FAMILIES = {"kriging": KrigingSettings, "universal": KrigingSettings, "rbf": RBFSettings, "idw": IDWSettings,
             "physics": PhysicsSettings}
_SHARED = ("cell_m", "n_readings", "n_positions", "repeatability_v_per_m", "data_spacing_m", "fast")


@dataclass(frozen=True)
class FieldSettings:
    """What a field model was built with: the method family's settings and the shared parts.

    Attributes
    ----------
    estimator : KrigingSettings, RBFSettings, IDWSettings or PhysicsSettings
        Settings of the chosen method.
    cell_m : float
        Grid cell, metres.
    n_readings : int
        Readings used.
    n_positions : int
        Distinct positions among them (repeats merged).
    repeatability_v_per_m : float or None
        Standard deviation of repeated readings at one position, V/m (None without repeats).
    data_spacing_m : float
        Median distance from each position to its nearest other position, metres.
    fast : bool
        True for the terminal app's fast path.
    std : BorrowedStd or None
        For RBF and IDW, where their standard deviation comes from; None for methods with one of their own.
    """

    estimator: MethodSettings
    cell_m: float
    n_readings: int
    n_positions: int
    repeatability_v_per_m: float | None
    data_spacing_m: float
    fast: bool = False
    std: BorrowedStd | None = None

    @property
    def kriging(self) -> KrigingSettings | None:
        """The kriging settings (ordinary or universal), or None for another method."""
        return self.estimator if isinstance(self.estimator, KrigingSettings) else None

    @property
    def rbf(self) -> RBFSettings | None:
        """The RBF settings, or None for another method."""
        return self.estimator if isinstance(self.estimator, RBFSettings) else None

    @property
    def idw(self) -> IDWSettings | None:
        """The IDW settings, or None for another method."""
        return self.estimator if isinstance(self.estimator, IDWSettings) else None

    @property
    def physics(self) -> PhysicsSettings | None:
        """The physical model's settings, or None for another method."""
        return self.estimator if isinstance(self.estimator, PhysicsSettings) else None

    @property
    def neighbors(self) -> int | None:
        """Moving neighbourhood size of the method, readings (None: every reading, or no such setting)."""
        return None if isinstance(self.estimator, PhysicsSettings) else self.estimator.neighbors

    @property
    def prediction_height_m(self) -> float | None:
        """Height above the floor the map shows the field at, metres (physical model only, else None)."""
        return None if self.physics is None else self.physics.prediction_height_m

    def to_dict(self) -> dict:
        """JSON-ready form: the object stored in survey files and written in the GeoTIFF's tags."""
        d = self.estimator.to_dict()
        if self.std is not None:
            d.update(self.std.to_dict())
        d.update({k: getattr(self, k) for k in _SHARED})
        return d

    @classmethod
    def from_dict(cls, d: Mapping, method: str) -> FieldSettings:
        """Read :meth:`to_dict` output, or the ``params`` of a model stored by an earlier version.

        Parameters
        ----------
        d : Mapping
            The JSON object.
        method : str
            The model's method (``kriging``, ``universal``, ``rbf``, ``idw`` or ``physics``).

        Raises
        ------
        MapperError
            For an unknown method or a missing key.
        """
        family = _FAMILIES.get(method)
        if family is None:
            raise MapperError(f"no field settings for method {method!r}; known: {', '.join(_FAMILIES)}",
                              where=_WHERE)
        what = f"{method} field settings"
        return cls(
            estimator=family.from_dict(d),
            cell_m=_need(d, "cell_m", what),
            n_readings=_need(d, "n_readings", what),
            n_positions=_need(d, "n_positions", what),
            repeatability_v_per_m=d.get("repeatability_v_per_m"),
            data_spacing_m=_need(d, "data_spacing_m", what),
            fast=d.get("fast", False),
            std=BorrowedStd.from_dict(d),
        )


__all__ = [
    "BorrowedStd",
    "CalibrationStats",
    "FieldSettings",
    "IDWSettings",
    "KrigingSettings",
    "LocalScale",
    "LooSplit",
    "MethodSettings",
    "PhysicsSettings",
    "RBFSettings",
    "SourceSummary",
    "SplitStats",
    "VariogramChoice",
    "VariogramFitSummary",
]
