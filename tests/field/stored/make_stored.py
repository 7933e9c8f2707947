"""Write field models as an earlier version of mapper stored them (the ``*.field`` files here).

Run with that version's tree first on the path, e.g. for commit 36825ef (the first stored format)::

    git archive 36825ef mapper | tar -x -C /tmp/old
    PYTHONPATH=/tmp/old python tests/field/stored/make_stored.py 36825ef tests/field/stored kriging,universal,rbf,idw

``e0a960d`` (the first physical model, before the local scaling of the borrowed std) wrote
``physics`` and ``rbf``. The readings are invented for the test (seeded), not measurements.
"""

import sys
from pathlib import Path

import numpy as np
import shapely

from mapper.field import build_field, field_to_bytes


def main() -> None:
    tag, out, methods = sys.argv[1], Path(sys.argv[2]), sys.argv[3].split(",")
    rng = np.random.default_rng(7)
    xy = rng.uniform(0, 20, size=(40, 2))
    z = 500 + 30 * xy[:, 0] + 200 * np.sin(xy[:, 1] / 3) + rng.normal(0, 5, 40)
    outline = shapely.box(0, 0, 20, 20)
    for m in methods:
        if m == "physics":
            # one point charge 1.5 m up at (8, 12) seen at 1 m, plus a background and noise
            xy2 = np.array([(x, y) for x in np.arange(1, 20, 1.5) for y in np.arange(1, 20, 1.5)])
            d2 = (xy2[:, 0] - 8) ** 2 + (xy2[:, 1] - 12) ** 2 + 1.5**2
            z2 = 20 + 9e3 * 1.5 / d2**1.5 + rng.normal(0, 2, len(xy2))
            g = build_field(xy2, z2, outline, method=m, cell_m=2.0, heights_m=np.full(len(z2), 1.0), seeds=())
        else:
            g = build_field(xy, z, outline, method=m, cell_m=2.0)
        (out / f"{tag}_{m}.field").write_bytes(field_to_bytes(g))
        print(tag, m, sorted(g.params))


if __name__ == "__main__":
    main()
