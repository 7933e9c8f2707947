"""Stage 1: the site -- outline, assets, zones and georeference, all in site metres."""

from mapper.site.georef import Georef, fit_similarity
from mapper.site.model import Asset, ControlPoint, Site, Zone
from mapper.site.site_file import load_site, site_from_toml_text

__all__ = [
    "Asset",
    "ControlPoint",
    "Georef",
    "Site",
    "Zone",
    "fit_similarity",
    "load_site",
    "site_from_toml_text",
]
