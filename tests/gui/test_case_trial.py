"""Trial values on the challenger: the score, the bars and the reasons follow each edit."""

import numpy as np
import pytest


@pytest.fixture
def challenger_case(demo_window):
    demo_window.ctx.focus.update(model="B", level="Case", row=7)
    return demo_window.levels["Case"]


def test_an_edit_rescoring_the_challenger_updates_score_bars_and_reasons(challenger_case):
    case = challenger_case
    before_score, before_bars = case.trial_score, case.bar_values.copy()
    bars_item = case._bar_items["bars"]
    count = len(case.bars.plot.items)
    original = float(case._original()["debt_to_income"].iloc[0])
    case.set_trial("debt_to_income", original + 0.4)
    assert case.trial_score != pytest.approx(before_score)
    assert "with trial values" in case.score_label.text()
    assert f"{case.trial_score:.4g}" in case.score_label.text()
    # the bars are those of the trial values: base value + contributions = explained output
    base = float(np.ravel(case.contributions.base_value)[0])
    assert base + case.bar_values.sum() == pytest.approx(case.trial_output, abs=1e-9)
    assert not np.allclose(case.bar_values, before_bars)
    # drawn in place: the same bar item, no items piling up in the plot
    assert case._bar_items["bars"] is bars_item and len(case.bars.plot.items) == count
    # the reason statements were stated for the trial score, not the score in the data
    assert case.reasons_panel.case.response == pytest.approx(case.trial_score)


def test_similar_rows_are_not_searched_again_for_each_edit(challenger_case):
    case = challenger_case
    runner = case.ctx.runner
    started = []
    runner.job_started.connect(lambda job: started.append(job.title))
    original = float(case._original()["debt_to_income"].iloc[0])
    for k in range(3):
        case.set_trial("debt_to_income", original + 0.1 * (k + 1))
    assert "Similar rows of one case" not in started
    assert started.count("Contributions of one case (model B)") == 3


def test_a_new_row_clears_the_bars_of_the_last_one(challenger_case):
    case = challenger_case
    case.go(row=8)
    assert case.state.row == 8 and case.trial == {}
    base = float(np.ravel(case.contributions.base_value)[0])
    assert base + case.bar_values.sum() == pytest.approx(case.trial_output, abs=1e-9)
