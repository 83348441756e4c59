"""The study spec: models, YAML loading with line numbers, per-stage settings."""

from famwise.spec.load import LoadedStudy, load_study
from famwise.spec.models import Study

__all__ = ["LoadedStudy", "Study", "load_study"]
