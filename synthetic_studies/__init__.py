"""Synthetic DICOM dose objects for an invented regional imaging network (demo and tests)."""

from .scenario import Scenario, load_scenario
from .write import CorpusSummary, write_corpus

__all__ = ["CorpusSummary", "Scenario", "load_scenario", "write_corpus"]
