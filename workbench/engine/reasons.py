"""Reason statements: the features that pushed one case towards the adverse outcome, in words.

A case is *adverse* when its response (probability of the class of interest, or the predicted
value) lies on the adverse side of the cutoff: ``response >= cutoff`` when ``adverse_if`` is
``"above"``, ``response < cutoff`` when it is ``"below"``. Its reason statements are the
features whose contributions (SHAP values on the explained output) pushed the score towards the
adverse side, largest push first, at most ``k`` of them (default 4: the official staff
commentary to Regulation B, 12 CFR part 1002, Supplement I, comment 9(b)(2)-1, says disclosing
more than four reasons is not likely to be helpful to the applicant).

Features marked *not allowed* (a protected attribute, or anything the analyst marks) are never
stated. When one of them carries a material share of the push, the analyst is told:
``|contribution| >= material * total adverse push``, where the total adverse push is the sum of
the adverse-signed contributions of all features (the sum of |contributions| when nothing
pushes towards the adverse side). The default share of 0.1 is common practice, no source.

The wording is the analyst's: :class:`ReasonTemplates` holds per feature a display name, a
unit, a number format and an optional sentence with placeholders, and round-trips through a
plain dict so the project file can keep it. Reason statements describe the model, not the
world, and must be reviewed by compliance under local law before anyone is told them; every
surface that shows them also shows ``workbench.report.render.CAUTIONS``.
"""

from __future__ import annotations

import math
import string
from collections.abc import Mapping, Sequence
from dataclasses import dataclass, field

import numpy as np
import pandas as pd

from workbench.engine.errors import InputError

DEFAULT_REASONS = 4  # Regulation B commentary, comment 9(b)(2)-1 (see the module docstring)
DEFAULT_MATERIAL = 0.1  # common practice, no source
ADVERSE_SIDES = ("above", "below")
PLACEHOLDERS = ("name", "value", "unit", "value_with_unit", "direction", "outcome", "rank",
                "rank_phrase", "contribution")
_RANK_PHRASES = ("more than any other factor", "the second most", "the third most",
                 "the fourth most", "the fifth most", "the sixth most", "the seventh most",
                 "the eighth most", "the ninth most", "the tenth most")


# ---- wording -------------------------------------------------------------------------------
@dataclass(frozen=True)
class FeatureWording:
    """How one feature is named in a sentence.

    ``number_format``: a ``str.format`` spec for numeric values, such as ``"{:.0%}"`` or
    ``"{:,.0f}"``. ``sentence``: replaces the default sentence; it may use the placeholders
    {name}, {value}, {unit}, {value_with_unit}, {direction}, {outcome}, {rank}, {rank_phrase}
    and {contribution}.
    """

    display_name: str
    unit: str = ""
    number_format: str = "{:.4g}"
    sentence: str | None = None

    def as_dict(self) -> dict:
        return {"display_name": self.display_name, "unit": self.unit,
                "number_format": self.number_format, "sentence": self.sentence}


@dataclass(frozen=True)
class ReasonTemplates:
    """The analyst's wording of reason statements: per feature, plus the outcome's name.

    ``outcome``: how the score is named ("the estimated default risk"); ``None`` uses a name
    built from the model ("the estimated probability of 1").
    """

    features: Mapping[str, FeatureWording] = field(default_factory=dict)
    outcome: str | None = None

    def wording(self, feature: str) -> FeatureWording:
        return self.features.get(feature) or FeatureWording(display_name=str(feature))

    def with_feature(self, feature: str, wording: FeatureWording) -> ReasonTemplates:
        return ReasonTemplates({**self.features, feature: wording}, self.outcome)

    def to_dict(self) -> dict:
        return {"outcome": self.outcome,
                "features": {f: w.as_dict() for f, w in self.features.items()}}

    @classmethod
    def from_dict(cls, data: Mapping) -> ReasonTemplates:
        """Read what :meth:`to_dict` wrote; unknown keys are refused with the feature named."""
        if not isinstance(data, Mapping):
            raise InputError("reason wording must be a mapping with 'outcome' and 'features'")
        features = {}
        allowed = {"display_name", "unit", "number_format", "sentence"}
        for name, spec in dict(data.get("features") or {}).items():
            if not isinstance(spec, Mapping):
                raise InputError(f"reason wording for {name!r} must be a mapping")
            extra = set(spec) - allowed
            if extra:
                raise InputError(f"reason wording for {name!r} has unknown keys: {', '.join(sorted(extra))}")
            wording = FeatureWording(
                display_name=str(spec.get("display_name") or name),
                unit=str(spec.get("unit") or ""),
                number_format=str(spec.get("number_format") or "{:.4g}"),
                sentence=None if spec.get("sentence") in (None, "") else str(spec["sentence"]),
            )
            check_sentence(wording.sentence, name)
            check_number_format(wording.number_format, name)
            features[str(name)] = wording
        outcome = data.get("outcome")
        return cls(features, None if outcome in (None, "") else str(outcome))

    @classmethod
    def from_display(cls, display: Mapping[str, tuple[str, str]], *,
                     outcome: str | None = None) -> ReasonTemplates:
        """From a ``feature -> (display name, unit)`` table such as the demo's LENDING_DISPLAY.

        Units starting "fraction of" are shown as percentages ("48% of gross income"), units
        naming a currency with thousands separators and no decimals.
        """
        features = {}
        for f, (name, unit) in display.items():
            number_format = "{:.4g}"
            if unit.startswith("fraction"):
                number_format, unit = "{:.0%}", unit[len("fraction"):].strip()
            elif unit.startswith("currency"):
                number_format = "{:,.0f}"
            features[f] = FeatureWording(name, unit, number_format)
        return cls(features, outcome)


def check_sentence(sentence: str | None, feature: str = "") -> None:
    """Refuse a custom sentence with placeholders we do not fill."""
    if sentence is None:
        return
    try:
        fields = [f for _, f, _, _ in string.Formatter().parse(sentence) if f is not None]
    except ValueError as exc:
        raise InputError(f"the reason sentence for {feature!r} is not well formed: {exc}") from None
    unknown = sorted({f for f in fields if f not in PLACEHOLDERS})
    if unknown:
        raise InputError(f"the reason sentence for {feature!r} uses unknown placeholder(s) "
                         f"{', '.join('{' + u + '}' for u in unknown)}; "
                         f"known: {', '.join('{' + p + '}' for p in PLACEHOLDERS)}")


def check_number_format(number_format: str, feature: str = "") -> None:
    try:
        number_format.format(1.5)
    except (ValueError, IndexError, KeyError) as exc:
        raise InputError(f"the number format {number_format!r} for {feature!r} does not format a "
                         f"number: {exc}") from None


def format_value(value, wording: FeatureWording) -> str:
    """The value as the sentence shows it ("not recorded" for a missing value)."""
    if value is None or (isinstance(value, float | np.floating) and math.isnan(value)) \
            or value is pd.NA:
        return "not recorded"
    if isinstance(value, bool | np.bool_):
        return "yes" if value else "no"
    if isinstance(value, int | float | np.integer | np.floating):
        number = float(value)
        if "%" not in wording.number_format and number.is_integer() and wording.number_format == "{:.4g}":
            return f"{int(number):d}" if abs(number) < 1e15 else f"{number:.4g}"
        return wording.number_format.format(number)
    return str(value)


def _rank_phrase(rank: int) -> str:
    return _RANK_PHRASES[rank - 1] if rank <= len(_RANK_PHRASES) else f"as factor number {rank}"


def default_outcome(adapter) -> str:
    if adapter is not None and getattr(adapter, "classes", None):
        return f"the estimated probability of {adapter.positive_class}"
    return f"the {getattr(adapter, 'response_units', None) or 'predicted value'}"


def side_phrases(adapter, adverse_if: str = "above", target: str | None = None) -> tuple[str, str]:
    """Plain names of the two sides of the cutoff: (the side reasons are stated for, the other).

    "Adverse" and "favourable" suit credit decisions only; for a claim frequency, a price or a
    diagnosis the sides are named by what the model predicts there.
    """
    task = getattr(adapter, "task", "")
    if task == "count":
        what = "predicted frequency"
    elif task == "regression":
        what = "predicted value"
    else:
        positive = getattr(adapter, "positive_class", None)
        numeric = isinstance(positive, int | float) and not isinstance(positive, bool)
        named = f"{target} = {positive}" if numeric and target else f"{positive}"
        what = f"estimated probability of {named}"
    high, low = f"higher {what}", f"lower {what}"
    return (high, low) if adverse_if == "above" else (low, high)


@dataclass(frozen=True)
class CutoffSides:
    """How messages name the two sides of the cutoff: ``stated``, the side reasons are stated
    for, and ``other``. The credit words by default; :meth:`plain` names them by what the
    model predicts there."""

    stated: str = "the adverse side"
    other: str = "the favourable side"

    @classmethod
    def plain(cls, adapter, adverse_if: str = "above", target: str | None = None) -> CutoffSides:
        stated, other = side_phrases(adapter, adverse_if, target)
        return cls(f"the side of {stated}", f"the side of {other}")


CREDIT_SIDES = CutoffSides()


def sentence_for(feature: str, value, contribution: float, rank: int, *, direction: str,
                 templates: ReasonTemplates, outcome: str) -> str:
    wording = templates.wording(feature)
    shown = format_value(value, wording)
    missing = shown == "not recorded"
    with_unit = shown if (missing or not wording.unit or wording.unit == "count") \
        else f"{shown} {wording.unit}"
    fill = {"name": wording.display_name, "value": shown, "unit": wording.unit,
            "value_with_unit": with_unit, "direction": direction, "outcome": outcome,
            "rank": rank, "rank_phrase": _rank_phrase(rank),
            "contribution": f"{contribution:+.3g}"}
    if wording.sentence:
        return wording.sentence.format_map(fill)
    return f"{wording.display_name} ({with_unit}) {direction} {outcome} {_rank_phrase(rank)}."


# ---- results -------------------------------------------------------------------------------
@dataclass(frozen=True)
class Reason:
    """One stated reason: ``contribution`` on the explained output, ``share`` of the adverse push."""

    feature: str
    value: object
    contribution: float
    rank: int
    text: str
    share: float = float("nan")

    def as_dict(self) -> dict:
        return {"feature": self.feature, "value": self.value, "contribution": self.contribution,
                "rank": self.rank, "share": self.share, "text": self.text}


@dataclass(frozen=True)
class NotAllowedFlag:
    """A not-allowed feature that moved the score materially; shown to the analyst, never stated."""

    feature: str
    contribution: float
    share: float
    towards_adverse: bool
    text: str

    def as_dict(self) -> dict:
        return {"feature": self.feature, "contribution": self.contribution, "share": self.share,
                "towards_adverse": self.towards_adverse, "text": self.text}


@dataclass(frozen=True)
class ReasonResult:
    """Reason statements for one case and the parameters that made them.

    ``adverse``: the case lies on the adverse side of the cutoff. ``response``: its response
    (probability of the class of interest, or predicted value). ``adverse_push``: sum of the
    adverse-signed contributions of all features. ``message``: one line for the analyst.
    """

    reasons: tuple[Reason, ...]
    flagged_not_allowed: tuple[NotAllowedFlag, ...]
    adverse: bool
    message: str
    response: float
    cutoff: float
    adverse_if: str
    k: int
    material: float
    on_request: bool
    not_allowed: tuple[str, ...]
    adverse_push: float
    outcome: str

    @property
    def texts(self) -> list[str]:
        return [r.text for r in self.reasons]


def _contributions(attributions_row, features: Sequence[str] | None) -> dict[str, float]:
    values = getattr(attributions_row, "values", None)
    if hasattr(attributions_row, "features") and isinstance(values, np.ndarray):
        arr = np.asarray(values, dtype=float)
        if arr.ndim == 2:
            if arr.shape[0] != 1:
                raise InputError(f"reason statements explain one case; the attributions hold "
                                 f"{arr.shape[0]} rows")
            arr = arr[0]
        return dict(zip(attributions_row.features, map(float, arr), strict=True))
    if isinstance(attributions_row, pd.Series):
        return {str(k): float(v) for k, v in attributions_row.items()}
    if isinstance(attributions_row, Mapping):
        return {str(k): float(v) for k, v in attributions_row.items()}
    arr = np.asarray(attributions_row, dtype=float).reshape(-1)
    if features is None or len(features) != arr.size:
        raise InputError("contributions given as an array need the matching feature names")
    return dict(zip(features, map(float, arr), strict=True))


def _plain(value):
    return value.item() if isinstance(value, np.generic) else value


def _values(values_row) -> dict:
    if isinstance(values_row, pd.DataFrame):
        if len(values_row) != 1:
            raise InputError(f"reason statements explain one case; the values hold {len(values_row)} rows")
        return {str(c): values_row[c].iloc[0] for c in values_row.columns}
    if isinstance(values_row, pd.Series):
        return {str(k): v for k, v in values_row.items()}
    return dict(values_row)


def case_response(adapter, values: Mapping) -> float:
    """The response of one case given as a dict of raw values."""
    frame = pd.DataFrame({c: [values[c]] for c in adapter.input_columns if c in values})
    return float(np.asarray(adapter.response(frame), dtype=float)[0])


def is_adverse(response: float, cutoff: float, adverse_if: str) -> bool:
    """The house rule: adverse at or above the cutoff ("above"), strictly below it ("below")."""
    return bool(response >= cutoff) if adverse_if == "above" else bool(response < cutoff)


def check_side(adverse_if: str) -> None:
    if adverse_if not in ADVERSE_SIDES:
        raise InputError(f"adverse_if must be 'above' or 'below', not {adverse_if!r}")


def check_cutoff(cutoff) -> float:
    try:
        value = float(cutoff)
    except (TypeError, ValueError):
        raise InputError(f"the cutoff must be a number, not {cutoff!r}") from None
    if not math.isfinite(value):
        raise InputError(f"the cutoff must be a finite number, not {cutoff!r}")
    return value


def reason_statements(attributions_row, values_row, *, adapter, cutoff: float,
                      adverse_if: str = "above", k: int = DEFAULT_REASONS,
                      templates: ReasonTemplates | None = None, not_allowed: Sequence[str] = (),
                      material: float = DEFAULT_MATERIAL, on_request: bool = False,
                      response: float | None = None,
                      sides: CutoffSides = CREDIT_SIDES) -> ReasonResult:
    """Reason statements for one case (see the module docstring for the rules).

    Parameters
    ----------
    attributions_row : an :class:`~workbench.engine.attribution.result.Attributions` of one row,
        or a mapping / Series of feature -> contribution on the explained output.
    values_row : the case's raw values (one-row DataFrame, Series or dict).
    cutoff : on the response scale (probability of the class of interest, or predicted value).
    adverse_if : ``"above"`` (adverse when response >= cutoff) or ``"below"`` (response < cutoff).
    k : most reasons stated (default 4, Regulation B commentary 9(b)(2)-1).
    not_allowed : features never stated (flagged to the analyst when material).
    material : share of the total adverse push that makes a not-allowed feature worth a flag.
    on_request : also give the strongest adverse factors of a case on the favourable side.
    response : the case's response when already known (otherwise the adapter scores it).
    sides : the names of the cutoff's sides in the messages (credit words by default).
    """
    check_side(adverse_if)
    cutoff = check_cutoff(cutoff)
    if int(k) != k or int(k) < 1:
        raise InputError(f"the number of reasons must be a whole number of at least 1, not {k!r}")
    k = int(k)
    if not 0 <= float(material) <= 1:
        raise InputError(f"the material share must lie between 0 and 1, not {material!r}")
    templates = templates or ReasonTemplates()
    contributions = _contributions(attributions_row, getattr(adapter, "input_columns", None))
    values = _values(values_row)
    blocked = tuple(dict.fromkeys(str(f) for f in not_allowed))
    if response is None:
        response = case_response(adapter, values)
    adverse = is_adverse(float(response), cutoff, adverse_if)
    outcome = templates.outcome or default_outcome(adapter)
    sign = 1.0 if adverse_if == "above" else -1.0  # adverse push = sign * contribution
    direction = "raised" if adverse_if == "above" else "lowered"

    features = list(contributions)
    push = np.array([sign * contributions[f] for f in features])
    total = float(push[push > 0].sum())
    scale = total if total > 0 else float(np.abs(push).sum())

    flags = []
    for f in blocked:
        if f not in contributions:
            continue
        c = contributions[f]
        share = abs(c) / scale if scale > 0 else 0.0
        if scale > 0 and abs(c) >= material * scale:
            towards = sign * c > 0
            flags.append(NotAllowedFlag(
                f, c, share, towards,
                f"{templates.wording(f).display_name} is marked not allowed but moved the score "
                f"{'towards' if towards else 'away from'} {sides.stated} by {abs(c):.3g} "
                f"({share:.0%} of the total push towards {sides.stated}); it is not stated "
                f"as a reason, but the model uses it: review it."))

    params = dict(adverse=adverse, response=float(response), cutoff=cutoff, adverse_if=adverse_if,
                  k=k, material=float(material), on_request=bool(on_request), not_allowed=blocked,
                  adverse_push=total, outcome=outcome)
    side = ("at or above" if adverse_if == "above" else "below") if adverse else \
        ("below" if adverse_if == "above" else "at or above")
    where = f"score {float(response):.4g} {side} the cutoff {cutoff:.4g}"
    if not adverse and not on_request:
        return ReasonResult((), tuple(flags), message=f"The case is on {sides.other} "
                            f"({where}): no reasons are stated.", **params)

    order = [i for i in np.argsort(-push, kind="stable") if push[i] > 0
             and features[i] not in blocked]
    reasons = []
    for rank, i in enumerate(order[:k], start=1):
        f = features[i]
        c = contributions[f]
        text = sentence_for(f, values.get(f), c, rank, direction=direction, templates=templates,
                            outcome=outcome)
        reasons.append(Reason(f, _plain(values.get(f)), c, rank, text,
                              share=float(push[i] / total) if total else 0.0))
    if not reasons:
        message = (f"The case is on {sides.stated} ({where}), but no allowed feature pushed it "
                   f"there: the base value itself lies on {sides.stated}."
                   if adverse else f"The case is on {sides.other} ({where}) and no allowed "
                   f"feature pushed it towards {sides.stated}.")
    elif adverse:
        message = (f"The case is on {sides.stated} ({where}); {len(reasons)} reason(s) stated, "
                   f"strongest first.")
    else:
        message = (f"The case is on {sides.other} ({where}); on request, the "
                   f"{len(reasons)} strongest factor(s) towards {sides.stated}.")
    return ReasonResult(tuple(reasons), tuple(flags), message=message, **params)


__all__ = [
    "CREDIT_SIDES",
    "CutoffSides",
    "DEFAULT_MATERIAL",
    "DEFAULT_REASONS",
    "FeatureWording",
    "NotAllowedFlag",
    "Reason",
    "ReasonResult",
    "ReasonTemplates",
    "case_response",
    "format_value",
    "is_adverse",
    "reason_statements",
    "side_phrases",
]
