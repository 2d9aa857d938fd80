"""Plant configuration: TOML schema (pydantic), loading with all problems reported
together, and the SI model of each unit that the computation stages use."""

from .load import load_config, parse_target_rate, resolve_path, store_url, validate_config
from .model import RateLawModel, UnitModel, tag_sigma, unit_model
from .schema import ROLE_KIND, PlantConfig, Tag, Unit

__all__ = ["load_config", "store_url", "validate_config", "parse_target_rate", "resolve_path", "unit_model", "UnitModel",
           "RateLawModel", "tag_sigma", "PlantConfig", "Unit", "Tag", "ROLE_KIND"]
