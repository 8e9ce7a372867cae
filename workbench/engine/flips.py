"""Nearest flip: the smallest changes to a case's actionable features that move it across the cutoff.

A counterfactual explanation in the sense of Wachter, Mittelstadt and Russell (2017),
"Counterfactual explanations without opening the black box: automated decisions and the GDPR",
Harvard Journal of Law & Technology 31(2): the closest input for which the model decides the
other way. We search a finite set of moves instead of solving their optimisation problem, so
that every value proposed is one the data has seen (or lies within the analyst's bounds) and
any model can be searched, whatever its form.

Rules:
- only ``actionable`` features change; ``immutable`` ones never do (immutable wins);
- numeric values stay within ``bounds`` (default: the 1st to 99th percentile of the observed
  values, so that no proposal rests on a handful of extreme rows; common practice, no source);
  integer columns take whole numbers; categorical features take levels observed in the data;
- ``monotone`` directions ("increase only" / "decrease only") are respected;
- at most ``max_changes`` features change at once.

Distance: the Gower (1971) distance between the changed and the original case over all the
model's inputs, with numeric ranges taken from the data (observed max - min): a changed numeric
feature adds |to - from| / range, a changed categorical one adds 1 (as does filling a missing
value), and the sum is divided by the number of inputs.

Search (batched: every step builds all its candidate rows and scores them in one call):
1. single moves: per feature a grid of observed quantiles (or its observed levels);
2. a beam of the most promising non-flipping states (largest move towards the cutoff, and
   largest move per unit distance) is extended by one more feature, up to ``max_changes``;
3. each flipping candidate is pruned (changes that are not needed are dropped) and its numeric
   changes shrunk towards the original value while it still flips;
4. up to ``options`` candidates with different feature sets are kept, smallest distance first,
   and each is verified by scoring it again with the model.
The cutoff is on the response scale (probability of the class of interest, or predicted value);
a case flips when its response crosses it (``>= cutoff`` on one side, ``< cutoff`` on the other).
"""

from __future__ import annotations

import math
from collections.abc import Mapping, Sequence
from dataclasses import dataclass, field

import numpy as np
import pandas as pd

from workbench.engine import jobs
from workbench.engine.effects import model_frame
from workbench.engine.errors import InputError
from workbench.engine.reasons import check_cutoff, check_side, is_adverse

DEFAULT_QUANTILES = (0.01, 0.99)  # default bounds: common practice, no source
GRID_POINTS = 16
BEAM_WIDTH = 24
SHRINK_STEPS = 16
REFINE_CANDIDATES = 12
_DIRECTIONS = {"increase only": 1, "increase": 1, "decrease only": -1, "decrease": -1}


@dataclass(frozen=True)
class FlipOption:
    """One way across the cutoff: ``changes`` as (feature, from, to), and the model's answer."""

    changes: tuple[tuple[str, object, object], ...]
    new_output: float
    new_response: float
    new_probability: float | None
    distance: float

    @property
    def features(self) -> tuple[str, ...]:
        return tuple(f for f, _, _ in self.changes)

    def trial_values(self) -> dict[str, object]:
        """The changed values, as the Case level's trial values."""
        return {f: to for f, _, to in self.changes}

    def as_dict(self) -> dict:
        return {"changes": [{"feature": f, "from": a, "to": b} for f, a, b in self.changes],
                "new_prediction": self.new_response, "new_output": self.new_output,
                "distance": self.distance}


@dataclass(frozen=True)
class FlipResult:
    """The nearest flips of one case and the parameters of the search."""

    options: tuple[FlipOption, ...]
    message: str
    original_response: float
    cutoff: float
    adverse_if: str
    adverse: bool
    actionable: tuple[str, ...]
    immutable: tuple[str, ...]
    bounds: Mapping[str, tuple[float, float]]
    monotone: Mapping[str, str]
    max_changes: int
    seed: int
    candidates_scored: int
    model_calls: int = 0
    ranges: Mapping[str, float] = field(default_factory=dict)

    @property
    def found(self) -> bool:
        return bool(self.options)


# ---- the search space ----------------------------------------------------------------------
@dataclass
class _Feature:
    name: str
    categorical: bool
    current: object
    candidates: list
    span: float
    integer: bool = False
    decimals: int = 0
    lo: float = math.nan
    hi: float = math.nan

    def term(self, value) -> float:
        """This feature's Gower term for moving from the current value to ``value``."""
        if self.categorical or _missing(self.current):
            return 1.0
        diff = abs(float(value) - float(self.current))
        if self.span > 0:
            return diff / self.span
        return float(diff > 0)


def _missing(value) -> bool:
    return value is None or value is pd.NA or (isinstance(value, float | np.floating) and math.isnan(value))


def _plain(value):
    if isinstance(value, np.generic):
        return value.item()
    return value


def _is_categorical(adapter, column: pd.Series) -> bool:
    return (column.name in set(adapter.categorical_columns)
            or not pd.api.types.is_numeric_dtype(column) or pd.api.types.is_bool_dtype(column))


def _names(values, what: str, known: Sequence[str]) -> tuple[str, ...]:
    if values is None:
        return ()
    if isinstance(values, str):
        values = [v.strip() for v in values.split(",") if v.strip()]
    out = tuple(dict.fromkeys(str(v) for v in values))
    unknown = [v for v in out if v not in known]
    if unknown:
        raise InputError(f"{what} feature(s) not among the model's inputs: {', '.join(unknown)}")
    return out


def _directions(monotone, known) -> dict[str, int]:
    out = {}
    for f, d in dict(monotone or {}).items():
        if f not in known:
            raise InputError(f"monotone direction given for {f!r}, which is not a model input")
        key = str(d).strip().lower()
        if key not in _DIRECTIONS:
            raise InputError(f"monotone direction for {f!r} must be 'increase only' or "
                             f"'decrease only', not {d!r}")
        out[f] = _DIRECTIONS[key]
    return out


def _numeric_feature(name, column: pd.Series, current, user_bounds, direction, grid) -> _Feature:
    values = pd.to_numeric(column, errors="coerce").to_numpy(dtype=float)
    values = values[np.isfinite(values)]
    if values.size == 0:
        return _Feature(name, False, current, [], 0.0)
    span = float(values.max() - values.min())
    integer = bool(pd.api.types.is_integer_dtype(column) or np.all(values == np.round(values)))
    decimals = 0 if integer else _decimals(values)
    if user_bounds is not None:
        lo, hi = (float(b) for b in user_bounds)
        if not lo <= hi:
            raise InputError(f"bounds for {name!r} must be (low, high) with low <= high, not {user_bounds!r}")
        inside = values[(values >= lo) & (values <= hi)]
        points = [lo, hi]
    else:
        lo, hi = (float(v) for v in np.quantile(values, DEFAULT_QUANTILES, method="inverted_cdf"))
        inside = values[(values >= lo) & (values <= hi)]
        points = []
    if inside.size:
        points += list(np.quantile(inside, np.linspace(0, 1, grid), method="inverted_cdf"))
    cand = np.unique(np.asarray(points, dtype=float))
    if integer:
        cand = np.unique(np.clip(np.round(cand), math.ceil(lo), math.floor(hi)))
    if not _missing(current):
        x0 = float(current)
        cand = cand[cand != x0]
        if direction > 0:
            cand = cand[cand > x0]
        elif direction < 0:
            cand = cand[cand < x0]
    elif direction:
        cand = np.asarray([], dtype=float)  # no direction from a missing value
    return _Feature(name, False, current, [_number(v, integer) for v in cand], span, integer,
                    decimals, lo, hi)


def _decimals(values: np.ndarray, most: int = 6) -> int:
    """Decimal places the column is recorded in (at most ``most``), from a sample of it."""
    sample = values[:: max(1, values.size // 2000)]
    for k in range(most + 1):
        scaled = sample * 10.0**k
        if np.allclose(scaled, np.round(scaled), rtol=0, atol=1e-6):
            return k
    return most


def _like(column: pd.Series, value):
    """A proposed value in the column's own kind (float columns keep floats)."""
    value = _plain(value)
    if isinstance(value, int) and pd.api.types.is_float_dtype(column):
        return float(value)
    return value


def _number(value: float, integer: bool):
    return int(round(value)) if integer else float(value)


def _categorical_feature(name, column: pd.Series, current, direction) -> _Feature:
    if direction:
        raise InputError(f"{name!r} is categorical: a monotone direction does not apply to it")
    levels = pd.Series(column.dropna().unique())
    levels = [v for v in levels if _missing(current) or v != current]
    try:
        levels = sorted(levels)
    except TypeError:
        levels = sorted(levels, key=str)
    return _Feature(name, True, current, [_plain(v) for v in levels], 1.0)


# ---- building and scoring candidate rows -----------------------------------------------------
class _Scorer:
    """Scores lists of change sets against the original row, counting the rows scored."""

    def __init__(self, adapter, x0: pd.DataFrame, features: dict[str, _Feature], cutoff: float):
        self.adapter, self.x0, self.features, self.cutoff = adapter, x0, features, cutoff
        self.r0 = float(np.asarray(adapter.response(x0), dtype=float)[0])
        self.down = self.r0 >= cutoff  # the response must fall below the cutoff to flip
        self.scored = 0
        self.calls = 0

    def frame(self, change_sets: Sequence[Mapping]) -> pd.DataFrame:
        n = len(change_sets)
        out = self.x0.loc[self.x0.index.repeat(n)].reset_index(drop=True)
        touched = dict.fromkeys(f for ch in change_sets for f in ch)
        for f in touched:
            idx = [i for i, ch in enumerate(change_sets) if f in ch]
            vals = [change_sets[i][f] for i in idx]
            col = out[f]
            if self.features[f].categorical:
                arr = col.to_numpy(dtype=object, copy=True)
                arr[idx] = vals
                try:
                    out[f] = pd.array(arr, dtype=col.dtype)
                except (TypeError, ValueError):
                    out[f] = arr
            else:
                arr = col.to_numpy(dtype=float, copy=True, na_value=np.nan)
                arr[idx] = vals
                if pd.api.types.is_integer_dtype(col) and np.all(np.isfinite(arr)) \
                        and np.all(arr == np.round(arr)):
                    out[f] = arr.astype(col.dtype)
                else:
                    out[f] = arr
        return out

    def responses(self, change_sets: Sequence[Mapping]) -> np.ndarray:
        if not change_sets:
            return np.zeros(0)
        self.scored += len(change_sets)
        self.calls += 1
        return np.asarray(self.adapter.response(self.frame(change_sets)), dtype=float)

    def flips(self, r: np.ndarray) -> np.ndarray:
        return r < self.cutoff if self.down else r >= self.cutoff

    def gain(self, r: np.ndarray) -> np.ndarray:
        return (self.r0 - r) if self.down else (r - self.r0)

    def distance(self, changes: Mapping) -> float:
        return sum(self.features[f].term(v) for f, v in changes.items())


def score_text(value: float, cutoff: float, digits: int = 4) -> str:
    """``value`` with enough digits that it does not read as the cutoff (0.19996, not 0.2)."""
    for d in range(digits, 13):
        text = f"{value:.{d}g}"
        if float(text) != cutoff or value == cutoff:
            return text
    return repr(float(value))


def _key(changes: Mapping) -> frozenset:
    return frozenset((f, repr(v)) for f, v in changes.items())


def nearest_flips(adapter, row_frame: pd.DataFrame, data: pd.DataFrame, *, cutoff: float,
                  adverse_if: str = "above", actionable: Sequence[str] | str | None,
                  immutable: Sequence[str] | str = (), bounds: Mapping | None = None,
                  monotone: Mapping[str, str] | None = None, max_changes: int = 3,
                  options: int = 3, seed: int = 0, grid: int = GRID_POINTS,
                  beam: int = BEAM_WIDTH, progress=None, cancel=None) -> FlipResult:
    """Up to ``options`` nearest flips of one case (see the module docstring for the rules).

    Parameters
    ----------
    row_frame : the case (one row; the model's raw columns, extra columns ignored).
    data : the rows whose observed values and ranges define the search space.
    cutoff : on the response scale; ``adverse_if`` says which side is adverse.
    actionable : features the applicant could change (required; an empty list is refused).
    immutable : features that must never change, even when also listed as actionable.
    bounds : feature -> (low, high) for numeric features, replacing the default percentiles.
    monotone : feature -> "increase only" or "decrease only".
    grid : quantile points per numeric feature. beam : states kept per search level.
    seed : recorded with the result; the search itself draws nothing at random.
    """
    check_side(adverse_if)
    cutoff = check_cutoff(cutoff)
    if int(max_changes) < 1 or int(options) < 1:
        raise InputError("max_changes and options must each be at least 1")
    x0 = model_frame(adapter, row_frame)
    if len(x0) != 1:
        raise InputError(f"a nearest flip is searched for one case; {len(x0)} rows were given")
    xd = model_frame(adapter, data)
    known = list(adapter.input_columns)
    act = _names(actionable, "actionable", known)
    imm = _names(immutable, "immutable", known)
    directions = _directions(monotone, known)
    movable = [f for f in act if f not in imm]
    if not movable:
        why = "none are given" if not act else "every actionable feature is also immutable"
        raise InputError(f"no actionable features to change ({why}): name the features the "
                         "applicant could change")
    bounds = {str(f): b for f, b in dict(bounds or {}).items()}
    for f in bounds:
        if f not in known:
            raise InputError(f"bounds given for {f!r}, which is not a model input")

    jobs.step(progress, cancel, 0.0, "nearest flip: building the candidate moves")
    features: dict[str, _Feature] = {}
    for f in known:
        column, current = xd[f], _plain(x0[f].iloc[0])
        if _is_categorical(adapter, column):
            if f in bounds:
                raise InputError(f"bounds given for {f!r}, which is categorical")
            features[f] = _categorical_feature(f, column, current, directions.get(f, 0) if f in movable else 0)
        else:
            features[f] = _numeric_feature(f, column, current, bounds.get(f), directions.get(f, 0), grid)
    scorer = _Scorer(adapter, x0, features, cutoff)
    adverse = is_adverse(scorer.r0, cutoff, adverse_if)
    p = len(known)

    moves = [(f, v) for f in movable for v in features[f].candidates]
    found: dict[frozenset, dict] = {}
    if moves:
        found = _search(scorer, moves, int(max_changes), int(beam), progress, cancel)
    jobs.step(progress, cancel, 0.7, "nearest flip: pruning and shrinking the changes")
    candidates = sorted(found.values(), key=lambda ch: (scorer.distance(ch), len(ch)))
    refined: dict[frozenset, dict] = {}
    best = candidates[: max(REFINE_CANDIDATES, 4 * int(options))]
    for ch in _shrink_all(scorer, _prune_all(scorer, best)):
        refined.setdefault(_key(ch), ch)
    chosen = _diverse(sorted(refined.values(), key=lambda ch: (scorer.distance(ch), len(ch))),
                      int(options))

    jobs.step(progress, cancel, 0.9, "nearest flip: verifying with the model")
    result_options = []
    if chosen:
        frame = scorer.frame(chosen)
        outputs = np.asarray(adapter.score(frame), dtype=float)
        responses = np.asarray(adapter.response(frame), dtype=float)
        probs = adapter.probability(frame)
        for i, ch in enumerate(chosen):
            if not scorer.flips(responses[i:i + 1])[0]:
                continue  # never report a change the model does not confirm
            changes = tuple((f, _plain(x0[f].iloc[0]), _like(x0[f], ch[f])) for f in known if f in ch)
            result_options.append(FlipOption(
                changes, float(outputs[i]), float(responses[i]),
                None if probs is None else float(probs[i]), scorer.distance(ch) / p))
    jobs.step(progress, cancel, 1.0, "nearest flip done")

    side = "below" if scorer.down else "at or above"
    where = f"score {scorer.r0:.4g}; to flip it must move {side} the cutoff {cutoff:.4g}"
    if result_options:
        message = (f"{len(result_options)} nearest flip(s) found ({where}), smallest change first; "
                   f"each checked by scoring it with the model.")
    elif not moves:
        message = (f"No nearest flip: the actionable features have no allowed values to move to "
                   f"within the bounds and directions ({where}).")
    else:
        message = (f"No change of at most {int(max_changes)} actionable feature(s) within the "
                   f"bounds moves the case across the cutoff ({where}).")
    used_bounds = {f: (features[f].lo, features[f].hi) for f in movable if not features[f].categorical}
    return FlipResult(
        options=tuple(result_options), message=message, original_response=scorer.r0,
        cutoff=cutoff, adverse_if=adverse_if, adverse=adverse, actionable=tuple(movable),
        immutable=imm, bounds=used_bounds,
        monotone={f: ("increase only" if d > 0 else "decrease only") for f, d in directions.items()},
        max_changes=int(max_changes), seed=int(seed), candidates_scored=scorer.scored,
        model_calls=scorer.calls,
        ranges={f: features[f].span for f in known if not features[f].categorical})


def _search(scorer: _Scorer, moves, max_changes: int, beam: int, progress, cancel) -> dict:
    """Breadth-limited search over sets of moves; returns every flipping change set found."""
    found: dict[frozenset, dict] = {}
    singles = [{f: v} for f, v in moves]
    r = scorer.responses(singles)
    gain = scorer.gain(r)
    flips = scorer.flips(r)
    for ch, hit in zip(singles, flips, strict=True):
        if hit:
            found[_key(ch)] = ch
    # moves worth combining: each single move that brings the case nearer the cutoff
    useful = [(m, g) for m, g, hit in zip(moves, gain, flips, strict=True) if g > 0 and not hit]
    states = [({f: v}, g) for (f, v), g in useful]
    by_feature: dict[str, list] = {}
    for (f, v), _g in useful:
        by_feature.setdefault(f, []).append(v)
    for level in range(2, max_changes + 1):
        jobs.step(progress, cancel, 0.1 + 0.6 * (level - 1) / max(max_changes, 1),
                  f"nearest flip: trying {level} changes at once")
        kept = _beam(scorer, states, beam)
        seen, batch = set(found), []
        for state, _g in kept:
            for f, values in by_feature.items():
                if f in state:
                    continue
                for v in values:
                    ch = {**state, f: v}
                    k = _key(ch)
                    if k in seen:
                        continue
                    seen.add(k)
                    batch.append(ch)
        if not batch:
            break
        r = scorer.responses(batch)
        gain = scorer.gain(r)
        hits = scorer.flips(r)
        for ch, hit in zip(batch, hits, strict=True):
            if hit:
                found[_key(ch)] = ch
        states = [(ch, g) for ch, g, hit in zip(batch, gain, hits, strict=True) if not hit and g > 0]
    return found


def _beam(scorer: _Scorer, states, width: int):
    """Half the beam by the largest move towards the cutoff, half by move per unit distance."""
    if len(states) <= width:
        return states
    by_gain = sorted(range(len(states)), key=lambda i: -states[i][1])
    by_rate = sorted(range(len(states)),
                     key=lambda i: -states[i][1] / max(scorer.distance(states[i][0]), 1e-12))
    picked: list[int] = []
    for i in [j for pair in zip(by_gain, by_rate, strict=True) for j in pair]:
        if i not in picked:
            picked.append(i)
        if len(picked) >= width:
            break
    return [states[i] for i in picked]


def _prune_all(scorer: _Scorer, candidates: list[dict]) -> list[dict]:
    """Drop changes a flip does not need (the costliest first), all candidates in one batch a round."""
    current = [dict(ch) for ch in candidates]
    active = [i for i, ch in enumerate(current) if len(ch) > 1]
    while active:
        trials, owner = [], []
        for i in active:
            for f in current[i]:
                trials.append({g: v for g, v in current[i].items() if g != f})
                owner.append(i)
        hits = scorer.flips(scorer.responses(trials))
        best: dict[int, dict] = {}
        for trial, i, hit in zip(trials, owner, hits, strict=True):
            if hit and (i not in best or scorer.distance(trial) < scorer.distance(best[i])):
                best[i] = trial
        for i, trial in best.items():
            current[i] = trial
        active = [i for i in best if len(current[i]) > 1]
    return current


def _shrink_all(scorer: _Scorer, candidates: list[dict], rounds: int = 2) -> list[dict]:
    """Move each numeric change back towards the original value while the case still flips.

    One batch per position and round: every candidate's largest change first, then its next
    one; each round tries ``SHRINK_STEPS`` values between the last value that did not flip and
    the nearest that did. Values are rounded (away from the original) to the precision the
    column is recorded in.
    """
    current = [dict(ch) for ch in candidates]
    orders = [sorted(ch, key=lambda g: -scorer.features[g].term(ch[g])) for ch in current]
    for position in range(max((len(o) for o in orders), default=0)):
        inner: dict[int, float] = {}  # candidate -> last value known not to flip
        for _ in range(rounds):
            trials, owner = [], []
            for i, order in enumerate(orders):
                if position >= len(order):
                    continue
                feat = scorer.features[order[position]]
                if feat.categorical or _missing(feat.current):
                    continue
                start = inner.get(i, float(feat.current))
                for v in _between(feat, start, float(current[i][feat.name])):
                    trials.append((i, feat.name, v))
                    owner.append(i)
            if not trials:
                break
            sets = [{**current[i], f: v} for i, f, v in trials]
            hits = scorer.flips(scorer.responses(sets))
            done: set[int] = set()
            for (i, _f, v), trial, hit in zip(trials, sets, hits, strict=True):
                if i in done:
                    continue
                if hit:  # trials run from the inner end outwards: the first hit is the nearest
                    current[i] = trial
                    done.add(i)
                else:
                    inner[i] = float(v)
    return current


def _between(feat: _Feature, start: float, to: float) -> list:
    """Values strictly between ``start`` and ``to``, nearest ``start`` first, on the column's grid."""
    steps = start + (to - start) * np.linspace(0, 1, SHRINK_STEPS + 1)[1:-1]
    scale = 10.0 ** feat.decimals
    steps = (np.ceil(steps * scale - 1e-9) if to > start else np.floor(steps * scale + 1e-9)) / scale
    steps = np.unique(steps[(steps != start) & (steps != to)])
    steps = steps[np.argsort(np.abs(steps - start))]
    return [_number(v, feat.integer) for v in steps]


def _diverse(candidates: list[dict], n: int) -> list[dict]:
    """Smallest first, each with a feature set no earlier choice has."""
    chosen, sets = [], []
    for ch in candidates:
        fs = frozenset(ch)
        if fs in sets:
            continue
        chosen.append(ch)
        sets.append(fs)
        if len(chosen) == n:
            break
    return chosen


__all__ = ["DEFAULT_QUANTILES", "FlipOption", "FlipResult", "nearest_flips", "score_text"]
