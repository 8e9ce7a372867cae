"""The window's segments are the engine's (workbench.engine.segments); this name stays for the
level modules that import it."""

from workbench.engine.segments import (  # noqa: F401
    OPERATORS,
    Condition,
    describe_segment,
    segment_mask,
    segment_rows,
)
