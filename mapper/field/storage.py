"""Bytes form of a :class:`FieldGrid`, for storing the field model inside a survey file."""

from __future__ import annotations

import io
import json
from dataclasses import asdict

import numpy as np

from mapper.errors import MapperError
from mapper.field.model import CVStats, FieldGrid
from mapper.field.settings import FieldSettings

_FORMAT = "mapper-field/1"


def field_to_bytes(grid: FieldGrid) -> bytes:
    """Serialise a field grid: arrays with ``np.savez_compressed``, the rest as JSON.

    Parameters
    ----------
    grid : FieldGrid

    Returns
    -------
    bytes
    """
    meta = {
        "format": _FORMAT,
        "method": grid.method,
        "params": {} if grid.settings is None else grid.settings.to_dict(),
        "cv": None if grid.cv is None else asdict(grid.cv),
        "cv_table": [asdict(c) for c in grid.cv_table],
        "reason": grid.reason,
    }
    try:
        text = json.dumps(meta, allow_nan=True)
    except (TypeError, ValueError) as exc:
        raise MapperError(f"field parameters are not JSON-serialisable: {exc}", where="field_to_bytes") from None
    buf = io.BytesIO()
    np.savez_compressed(
        buf, x=grid.x, y=grid.y, estimate=grid.estimate, std=grid.std,
        meta=np.frombuffer(text.encode("utf-8"), dtype=np.uint8),
    )
    return buf.getvalue()


def field_from_bytes(data: bytes) -> FieldGrid:
    """Rebuild a field grid written by :func:`field_to_bytes` (of this version or an earlier one).

    The settings are read with :meth:`FieldSettings.from_dict`, which accepts the ``params``
    of earlier versions (fewer keys).
    """
    try:
        with np.load(io.BytesIO(data), allow_pickle=False) as npz:
            arrays = {k: npz[k] for k in ("x", "y", "estimate", "std", "meta")}
        meta = json.loads(arrays["meta"].tobytes().decode("utf-8"))
    except (OSError, ValueError, KeyError) as exc:
        raise MapperError(f"stored field model is unreadable ({exc})", where="field_from_bytes") from None
    if meta.get("format") != _FORMAT:
        raise MapperError(
            f"stored field model has format {meta.get('format')!r}; this version reads {_FORMAT!r}",
            where="field_from_bytes",
        )
    params = meta["params"]
    try:
        settings = FieldSettings.from_dict(params, meta["method"]) if params else None
    except (MapperError, TypeError, AttributeError) as exc:
        text = exc.message if isinstance(exc, MapperError) else str(exc)
        raise MapperError(f"stored field model is unreadable ({text})", where="field_from_bytes") from None
    return FieldGrid(
        x=arrays["x"], y=arrays["y"], estimate=arrays["estimate"], std=arrays["std"],
        method=meta["method"], settings=settings,
        cv=None if meta["cv"] is None else CVStats(**meta["cv"]),
        cv_table=tuple(CVStats(**c) for c in meta["cv_table"]),
        reason=meta["reason"],
    )
