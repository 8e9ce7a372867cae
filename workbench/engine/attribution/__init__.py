"""Attributions (SHAP values) per raw input column.

The public face is ``workbench.engine.attributions``; see README.md here.
"""

from workbench.engine.attribution.background import select_background
from workbench.engine.attribution.explain import METHOD_CHOICES, explain
from workbench.engine.attribution.result import METHODS, Attributions

__all__ = ["METHODS", "METHOD_CHOICES", "Attributions", "explain", "select_background"]
