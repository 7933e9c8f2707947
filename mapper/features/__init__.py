"""Map features: what a field model means for the people working on the site.

Contours and bands, hotspots with their exceedance probability, the ESD keep-away rules,
sampling advice and the comparison of two surveys. Pure functions of a
:class:`~mapper.field.model.FieldGrid` and a :class:`~mapper.site.model.Site`; :func:`analyse`
bundles them for the CLI, the exports, the report and the terminal app.
"""

from mapper.features.advice import Suggestion, advise_sampling, walkable_area
from mapper.features.cautions import CAUTIONS, LIMITS_ARE_DEFAULTS
from mapper.features.compare import (
    Comparison,
    ComparisonSummary,
    HotspotChange,
    check_same_site,
    compare_fields,
)
from mapper.features.contours import Band, IsoLine, Levels, bands, iso_lines, nice_levels
from mapper.features.findings import Findings, analyse
from mapper.features.hotspots import (
    Hotspot,
    ProbableRegion,
    critical_magnitude,
    exceedance_probability,
    find_hotspots,
    probable_exceedance,
    zone_hotspots,
)
from mapper.features.limits import (
    DEFAULT_RULES,
    DEFAULT_THRESHOLD_V_PER_M,
    RULE_S20_20_1999,
    RULE_S20_20_2014,
    KeepAwayRule,
    Violation,
    check_keep_away,
)

__all__ = [
    "CAUTIONS",
    "DEFAULT_RULES",
    "DEFAULT_THRESHOLD_V_PER_M",
    "LIMITS_ARE_DEFAULTS",
    "RULE_S20_20_1999",
    "RULE_S20_20_2014",
    "Band",
    "Comparison",
    "ComparisonSummary",
    "Findings",
    "Hotspot",
    "HotspotChange",
    "IsoLine",
    "KeepAwayRule",
    "Levels",
    "ProbableRegion",
    "Suggestion",
    "Violation",
    "advise_sampling",
    "analyse",
    "bands",
    "check_keep_away",
    "check_same_site",
    "compare_fields",
    "critical_magnitude",
    "exceedance_probability",
    "find_hotspots",
    "iso_lines",
    "nice_levels",
    "probable_exceedance",
    "walkable_area",
    "zone_hotspots",
]
