"""Typed field settings: today's JSON keys exactly, and models stored by earlier versions read."""

import dataclasses
import json
from pathlib import Path

import numpy as np
import pytest
import shapely

from mapper.errors import MapperError
from mapper.field import (
    BorrowedStd,
    FieldSettings,
    IDWSettings,
    KrigingSettings,
    PhysicsSettings,
    RBFSettings,
    build_field,
    field_from_bytes,
    field_to_bytes,
)
from tests.cli import golden

STORED = Path(__file__).with_name("stored")


def _fixture_settings() -> list[tuple[str, str, dict]]:
    """(case, method, settings dict) of every model pinned in the golden fixture."""
    want = json.loads(golden.FIXTURE.read_text(encoding="utf-8"))
    cases = [("stored", want["stored_field"]), ("live", want["live"]["grid"])]
    cases += [(f"methods.{k}", v) for k, v in want["methods"].items()]
    return [(name, g["method"], g["params"]) for name, g in cases]


@pytest.mark.parametrize(("case", "method", "params"), _fixture_settings(),
                         ids=lambda v: v if isinstance(v, str) else "")
def test_to_dict_gives_todays_keys_in_todays_order(case, method, params):
    s = FieldSettings.from_dict(params, method)
    d = s.to_dict()
    assert list(d) == list(params)  # same keys, same order: the stored text is unchanged
    assert json.dumps(d, allow_nan=True) == json.dumps(params, allow_nan=True)
    assert FieldSettings.from_dict(json.loads(json.dumps(d)), method) == s


def test_the_method_family_decides_the_typed_part():
    cases = {c: (p, m) for c, m, p in _fixture_settings()}
    k = FieldSettings.from_dict(*cases["methods.universal"])
    assert isinstance(k.estimator, KrigingSettings) and k.kriging.drift == "linear"
    assert k.rbf is k.idw is k.physics is None and k.std is None
    r = FieldSettings.from_dict(*cases["methods.rbf"])
    assert isinstance(r.estimator, RBFSettings) and r.kriging is None
    assert isinstance(r.std, BorrowedStd) and r.std.reference.drift is None
    assert r.std.local.min_factor <= r.std.local.max_factor
    i = FieldSettings.from_dict(*cases["methods.idw"])
    assert isinstance(i.estimator, IDWSettings) and i.neighbors == i.idw.neighbors
    p = FieldSettings.from_dict(*cases["methods.physics_at_0.7m"])
    assert isinstance(p.estimator, PhysicsSettings) and p.prediction_height_m == 0.7
    assert p.neighbors is None and p.physics.loo_split.near_sources.n > 0
    with pytest.raises(dataclasses.FrozenInstanceError):
        p.cell_m = 2.0  # type: ignore[misc]
    with pytest.raises(TypeError):
        k.kriging.variogram_choice.r2["gaussian"] = 0.0  # read-only mapping


def _without_share_m(d):
    if isinstance(d, dict):
        return {k: _without_share_m(v) for k, v in d.items() if k != "share_m"}
    return d


STORED_CASES = sorted(p.name for p in STORED.glob("*.field"))


@pytest.mark.parametrize("name", STORED_CASES)
def test_models_stored_by_earlier_versions_are_read(name):
    data = (STORED / name).read_bytes()
    old = golden.stored_params(data)
    g = field_from_bytes(data)
    s = g.settings
    assert s.cell_m == old["cell_m"] == g.cell_m and s.n_readings == old["n_readings"]
    # every key of the old file is kept with its value (but share_m, the side of a removed
    # approximate mode, which is read and dropped); keys added since come only as None
    d = s.to_dict()
    old = _without_share_m(old)
    assert {k: d[k] for k in old} == old
    assert all(d[k] is None for k in set(d) - set(old))
    if g.method in ("kriging", "universal"):
        assert s.kriging.variogram.to_dict() == old["variogram"]
        assert s.kriging.variogram_choice is None and s.kriging.variogram_fit.n_bins == old["variogram_fit"]["n_bins"]
    elif g.method == "rbf":
        assert s.rbf.smoothing == old["smoothing"]
        assert (s.std is None) == ("std_source" not in old)  # the first version recorded no std source
        if s.std is not None:
            assert s.std.scale == old["std_scale"] and s.std.local is None  # before the local scaling
    elif g.method == "idw":
        assert s.idw.power == old["power"]
    else:
        assert [x.wkt for x in s.physics.sources] == [x["wkt"] for x in old["physics"]["sources"]]
        assert s.prediction_height_m == old["prediction_height_m"]
    # and saved again, the same model comes back
    assert field_from_bytes(field_to_bytes(g)).settings == s


def test_every_earlier_method_has_a_stored_sample():
    assert {n.split("_", 1)[1].removesuffix(".field") for n in STORED_CASES} == {
        "kriging", "universal", "rbf", "idw", "physics"}


def test_bad_stored_settings_are_a_one_line_error():
    rng = np.random.default_rng(1)
    xy = rng.uniform(0, 10, (30, 2))
    g = build_field(xy, xy[:, 0] * 10.0, shapely.box(0, 0, 10, 10), method="idw", cell_m=1.0)
    d = g.settings.to_dict()
    d.pop("cell_m")
    with pytest.raises(MapperError, match="lacks the key 'cell_m'"):
        FieldSettings.from_dict(d, "idw")
    with pytest.raises(MapperError, match="no field settings for method 'spline'"):
        FieldSettings.from_dict(g.settings.to_dict(), "spline")
    broken = dataclasses.replace(g, settings=None)
    data = field_to_bytes(broken)
    assert field_from_bytes(data).settings is None  # a grid without settings stays without
    # a stored object whose settings lack a key: refused by name, not a traceback
    meta = golden.stored_params(field_to_bytes(g))
    meta.pop("power")
    bad = _with_params(field_to_bytes(g), meta)
    with pytest.raises(MapperError, match="unreadable.*'power'"):
        field_from_bytes(bad)


def _with_params(data: bytes, params: dict) -> bytes:
    import io

    with np.load(io.BytesIO(data), allow_pickle=False) as npz:
        arrays = {k: npz[k] for k in npz.files}
    meta = json.loads(arrays["meta"].tobytes().decode("utf-8"))
    meta["params"] = params
    arrays["meta"] = np.frombuffer(json.dumps(meta).encode("utf-8"), dtype=np.uint8)
    buf = io.BytesIO()
    np.savez_compressed(buf, **arrays)
    return buf.getvalue()
