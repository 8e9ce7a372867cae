"""Attributions (SHAP values) per raw input column of a model: the public API.

``explain(adapter, frame, ...)`` -> :class:`Attributions`; ``select_background(frame, size)``.
The methods live in :mod:`workbench.engine.attribution` (tree, linear, model-agnostic); see
its README.md for the default form and the known problems of the reference library we avoid.
"""

from workbench.engine.attribution import (
    METHOD_CHOICES,
    METHODS,
    Attributions,
    explain,
    select_background,
)

__all__ = ["METHODS", "METHOD_CHOICES", "Attributions", "explain", "select_background"]
