"""Audit checks with a status (pass / warn / fail) and the evidence behind it.

:func:`run_checks` runs every check the inputs allow; each check is also a function of its own
(``check_monotonicity``, ``check_score_stability``, ``check_feature_stability``,
``check_adverse_impact``, ``check_leakage``, ``check_additivity``, ``check_calibration``,
``check_data_quality``). Each module documents its limits and says where they come from.
"""

from workbench.engine.checks.drift import check_feature_stability, check_score_stability
from workbench.engine.checks.leakage import check_leakage, single_feature_auc
from workbench.engine.checks.model_checks import check_additivity, check_calibration
from workbench.engine.checks.monotonicity import (
    DIRECTIONS,
    check_monotonicity,
    parse_direction,
    violations,
)
from workbench.engine.checks.quality import check_data_quality
from workbench.engine.checks.result import STATUSES, CheckResult, worst_status
from workbench.engine.checks.run import Thresholds, run_checks, summarise
from workbench.engine.checks.segments import check_adverse_impact

__all__ = [
    "DIRECTIONS", "STATUSES", "CheckResult", "Thresholds", "check_additivity",
    "check_adverse_impact", "check_calibration", "check_data_quality", "check_feature_stability",
    "check_leakage", "check_monotonicity", "check_score_stability", "parse_direction",
    "run_checks", "single_feature_auc", "summarise", "violations", "worst_status",
]
