"""Config: YAML with line numbers -> validated, frozen specs."""
from cohortstone.config.load import load_yaml
from cohortstone.config.spec import Study, parse_study

__all__ = ["load_yaml", "parse_study", "Study"]
