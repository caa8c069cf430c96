"""Scenario section for the uncertainty analysis (filled in by the uncertainty model)."""
from __future__ import annotations

from tco.scenario.base import Section


class UncertaintySettings(Section):
    """Sensitivity, break-even and Monte Carlo settings."""
