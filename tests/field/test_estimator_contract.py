"""Every field method keeps one contract: settings as given, fit/predict/loo, an unfitted error.

The contract is scikit-learn's and verde's estimator convention (Uieda, verde documentation,
"Gridders"; Pedregosa et al. 2011, JMLR 12, section on the estimator API): the constructor stores
its arguments under their own names, ``fit`` learns and returns self, learned state ends in ``_``.
The readings are an analytic field, a point charge q = 2 nC at 1.5 m over a grounded floor (the
method of images, Jackson, Classical Electrodynamics, section 2.1), sampled on a 2 m walk.
"""

from __future__ import annotations

import numpy as np
import pytest

from mapper.errors import MapperError, NotFittedError, UsageError
from mapper.field import RBF, OrdinaryKriging, UniversalKriging
from mapper.field.estimator import FieldEstimator, fitted_attributes, settings
from mapper.field.idw import IDW
from mapper.field.physical import PhysicalModel

FACTORIES = {
    "kriging": lambda: OrdinaryKriging(),
    "universal": lambda: UniversalKriging(),
    "rbf": lambda: RBF(),
    "idw": lambda: IDW(),
    "physics": lambda: PhysicalModel(bounds=(0.0, 0.0, 12.0, 10.0)),
}


EPS0 = 8.8541878128e-12  # F/m, CODATA 2018


def _walk():
    # E_z at height 1 m of q at (5, 4, 1.5) and its image -q at depth 1.5 m:
    # E_z = q / (4 pi eps0) * ((z - h) / r1^3 - (z + h) / r2^3)
    gx, gy = np.meshgrid(np.arange(0.0, 12.1, 2.0), np.arange(0.0, 10.1, 2.0))
    xy = np.column_stack([gx.ravel(), gy.ravel()])
    q, h, zm = 2e-9, 1.5, 1.0
    rho2 = (xy[:, 0] - 5.0) ** 2 + (xy[:, 1] - 4.0) ** 2
    r1, r2 = np.sqrt(rho2 + (zm - h) ** 2), np.sqrt(rho2 + (zm + h) ** 2)
    return xy, q / (4 * np.pi * EPS0) * ((zm - h) / r1**3 - (zm + h) / r2**3)


@pytest.mark.parametrize("name", list(FACTORIES))
def test_every_method_keeps_the_estimator_contract(name):
    est = FACTORIES[name]()
    assert isinstance(est, FieldEstimator)
    # the constructor stores each setting under its own name, unchanged, and learns nothing
    before = settings(est)
    assert fitted_attributes(est) == []
    with pytest.raises(NotFittedError, match="before predict"):
        est.predict([[1.0, 1.0]])
    with pytest.raises(NotFittedError, match="before loo"):
        est.loo()
    xy, z = _walk()
    assert est.fit(xy, z) is est
    assert fitted_attributes(est)
    assert settings(est) == before  # fit does not rewrite the settings
    e, s = est.predict(xy[:3])
    assert e.shape == s.shape == (3,) and np.isfinite(e).all()
    err, err_std = est.loo()
    assert err.shape == (xy.shape[0],) and np.isfinite(err).all()
    assert err_std is None or err_std.shape == err.shape


def test_bad_settings_are_a_users_error_at_fit_and_misuse_is_not():
    xy, z = _walk()
    bad = [OrdinaryKriging(neighbors=1), RBF(kernel="nope"), IDW(power=-1.0), IDW(neighbors=0),
           PhysicalModel(max_sources=0), UniversalKriging(drift="cubic")]
    for est in bad:
        with pytest.raises(MapperError):
            est.fit(xy, z)
    assert issubclass(NotFittedError, UsageError) and not issubclass(NotFittedError, MapperError)
