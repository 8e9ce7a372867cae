"""The levels of the rail; importing this package registers them all."""

from workbench.ui.levels import base, case, effect, pairs, portfolio, ranking, versions  # noqa: F401
