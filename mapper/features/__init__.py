"""Map features: what a field model means for the people working on the site.

Contours and bands, hotspots with their exceedance probability, the ESD keep-away rules,
sampling advice and the comparison of two surveys. Pure functions of a
:class:`~mapper.field.model.FieldGrid` and a :class:`~mapper.site.model.Site`; :func:`analyse`
bundles them for the CLI, the exports, the report and the terminal app.

The names below are imported on first use (PEP 562), so importing one submodule does not load
the whole package.
"""

from __future__ import annotations

from typing import TYPE_CHECKING

from mapper.lazy import lazy_exports

_WHERE = {
    "Suggestion": "mapper.features.advice",
    "advise_sampling": "mapper.features.advice",
    "walkable_area": "mapper.features.advice",
    "CAUTIONS": "mapper.features.cautions",
    "LIMITS_ARE_DEFAULTS": "mapper.features.cautions",
    "Comparison": "mapper.features.compare",
    "ComparisonSummary": "mapper.features.compare",
    "HotspotChange": "mapper.features.compare",
    "check_same_site": "mapper.features.compare",
    "compare_fields": "mapper.features.compare",
    "Band": "mapper.features.contours",
    "IsoLine": "mapper.features.contours",
    "Levels": "mapper.features.contours",
    "bands": "mapper.features.contours",
    "iso_lines": "mapper.features.contours",
    "nice_levels": "mapper.features.contours",
    "Findings": "mapper.features.findings",
    "analyse": "mapper.features.findings",
    "Hotspot": "mapper.features.hotspots",
    "ProbableRegion": "mapper.features.hotspots",
    "critical_magnitude": "mapper.features.hotspots",
    "exceedance_probability": "mapper.features.hotspots",
    "find_hotspots": "mapper.features.hotspots",
    "probable_exceedance": "mapper.features.hotspots",
    "zone_hotspots": "mapper.features.hotspots",
    "DEFAULT_RULES": "mapper.features.limits",
    "DEFAULT_THRESHOLD_V_PER_M": "mapper.features.limits",
    "KeepAwayRule": "mapper.features.limits",
    "RULE_S20_20_1999": "mapper.features.limits",
    "RULE_S20_20_2014": "mapper.features.limits",
    "Violation": "mapper.features.limits",
    "check_keep_away": "mapper.features.limits",
}

__all__ = sorted(_WHERE)

if TYPE_CHECKING:  # for type checkers and editors: the eager form
    from mapper.features.advice import Suggestion, advise_sampling, walkable_area  # noqa: F401
    from mapper.features.cautions import CAUTIONS, LIMITS_ARE_DEFAULTS  # noqa: F401
    from mapper.features.compare import (  # noqa: F401
        Comparison,
        ComparisonSummary,
        HotspotChange,
        check_same_site,
        compare_fields,
    )
    from mapper.features.contours import Band, IsoLine, Levels, bands, iso_lines, nice_levels  # noqa: F401
    from mapper.features.findings import Findings, analyse  # noqa: F401
    from mapper.features.hotspots import (  # noqa: F401
        Hotspot,
        ProbableRegion,
        critical_magnitude,
        exceedance_probability,
        find_hotspots,
        probable_exceedance,
        zone_hotspots,
    )
    from mapper.features.limits import (  # noqa: F401
        DEFAULT_RULES,
        DEFAULT_THRESHOLD_V_PER_M,
        RULE_S20_20_1999,
        RULE_S20_20_2014,
        KeepAwayRule,
        Violation,
        check_keep_away,
    )


__getattr__, __dir__ = lazy_exports(__name__, _WHERE)
