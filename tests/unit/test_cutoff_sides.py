"""How messages name the cutoff's sides: credit words by default, the model's prediction in
plain words for a claim frequency, a price or a class probability (engine, no window)."""

from types import SimpleNamespace

import pytest

from workbench.engine.explanation_stability import reason_stability
from workbench.engine.reasons import CREDIT_SIDES, CutoffSides, reason_statements, side_phrases
from workbench.engine.similar import SimilarRow, similar_summary


@pytest.mark.parametrize("adapter, target, adverse_if, expected", [
    (SimpleNamespace(task="count"), None, "above",
     ("higher predicted frequency", "lower predicted frequency")),
    (SimpleNamespace(task="regression"), None, "below",
     ("lower predicted value", "higher predicted value")),
    (SimpleNamespace(task="binary", positive_class=1), "default", "above",
     ("higher estimated probability of default = 1", "lower estimated probability of default = 1")),
    (SimpleNamespace(task="binary", positive_class="bad"), "status", "above",
     ("higher estimated probability of bad", "lower estimated probability of bad")),
])
def test_side_phrases_name_what_the_model_predicts(adapter, target, adverse_if, expected):
    assert side_phrases(adapter, adverse_if, target) == expected
    sides = CutoffSides.plain(adapter, adverse_if, target)
    assert (sides.stated, sides.other) == tuple(f"the side of {e}" for e in expected)


class _Adapter:
    """Just enough of a model adapter for reason_statements: two inputs, a known response."""
    input_columns = ("a", "b")
    classes = None
    response_units = "claims per year"


def test_reason_messages_use_the_sides_given():
    plain = CutoffSides("the side of higher predicted frequency",
                        "the side of lower predicted frequency")
    kwargs = dict(adapter=_Adapter(), cutoff=0.5, adverse_if="above", on_request=True)
    high = reason_statements({"a": 0.3, "b": -0.1}, {"a": 1, "b": 2}, response=0.8,
                             sides=plain, **kwargs)
    assert high.message.startswith("The case is on the side of higher predicted frequency")
    low = reason_statements({"a": 0.3, "b": -0.1}, {"a": 1, "b": 2}, response=0.2,
                            sides=plain, **kwargs)
    assert "on the side of lower predicted frequency" in low.message
    assert low.message.endswith("factor(s) towards the side of higher predicted frequency.")
    credit = reason_statements({"a": 0.3, "b": -0.1}, {"a": 1, "b": 2}, response=0.8, **kwargs)
    assert credit.message.startswith("The case is on the adverse side")
    assert "adverse" not in high.message and "favourable" not in low.message


def test_not_allowed_flag_names_the_stated_side():
    plain = CutoffSides("the side of higher predicted value", "the side of lower predicted value")
    got = reason_statements({"a": 0.3, "b": 0.2}, {"a": 1, "b": 2}, adapter=_Adapter(), cutoff=0.5,
                            response=0.9, not_allowed=("b",), sides=plain)
    assert "towards the side of higher predicted value by 0.2" in got.flagged_not_allowed[0].text
    assert "(40% of the total push towards the side of higher predicted value)" \
        in got.flagged_not_allowed[0].text


def test_similar_summary_counts_on_the_stated_side():
    rows = [SimilarRow(row=i, distance=0.1 * (i + 1), prediction=p, label=None)
            for i, p in enumerate((0.9, 0.2, 0.7))]
    assert "2 of 3 on the adverse side (cutoff 0.5)" in similar_summary(rows, cutoff=0.5)
    plain = CutoffSides("the side of higher predicted frequency", "x")
    assert "2 of 3 on the side of higher predicted frequency (cutoff 0.5)" in similar_summary(
        rows, cutoff=0.5, sides=plain)
    assert CREDIT_SIDES == CutoffSides()


def test_stability_refusal_names_the_other_side():
    import pandas as pd

    class Scored(_Adapter):
        def response(self, frame):
            return [0.1] * len(frame)

    row = pd.DataFrame({"a": [1.0], "b": [2.0]})
    pool = pd.DataFrame({"a": range(10), "b": range(10)}, dtype=float)
    with pytest.raises(Exception, match="on the side of lower predicted value"):
        reason_stability(Scored(), row, pool, background_size=5, cutoff=0.5, on_request=False,
                         sides=CutoffSides("hi", "the side of lower predicted value"))
