"""The levels of the rail; importing this package registers them all."""

from workbench.ui.levels import (  # noqa: F401
    base,
    case,
    checks,
    dossier,
    effect,
    pairs,
    portfolio,
    ranking,
    versions,
)
