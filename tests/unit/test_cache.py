"""Behaviour of workbench.engine.cache: keys, memory LRU, disk copies."""

import numpy as np
import pytest

from workbench.engine.cache import ResultCache, cache_key
from workbench.engine.effects import EffectCurve


def _key(**params):
    return cache_key("m" * 64, "d" * 64, "segment: all rows", "partial_dependence", params)


def test_same_inputs_same_key_and_any_change_misses():
    base = _key(feature="income", grid_size=20, seed=0)
    assert base == _key(seed=0, grid_size=20, feature="income")  # order does not matter
    assert len(base) == 64
    assert base != _key(feature="income", grid_size=21, seed=0)
    assert base != cache_key(
        "x" * 64,
        "d" * 64,
        "segment: all rows",
        "partial_dependence",
        {"feature": "income", "grid_size": 20, "seed": 0},
    )
    assert base != cache_key(
        "m" * 64,
        "d" * 64,
        "segment: west",
        "partial_dependence",
        {"feature": "income", "grid_size": 20, "seed": 0},
    )
    assert base != cache_key(
        "m" * 64,
        "d" * 64,
        "segment: all rows",
        "ale",
        {"feature": "income", "grid_size": 20, "seed": 0},
    )
    # arrays and numpy scalars are keyed by value
    assert _key(grid=np.array([1.0, 2.0])) == _key(grid=np.array([1.0, 2.0]))
    assert _key(grid=np.array([1.0, 2.0])) != _key(grid=np.array([1.0, 3.0]))
    assert _key(seed=np.int64(3)) == _key(seed=3)


def test_hit_returns_the_same_object_and_other_parameters_miss():
    cache = ResultCache()
    calls = []

    def compute():
        calls.append(1)
        return {"pd": np.arange(3)}

    first = cache.get_or_compute(_key(seed=0), compute)
    again = cache.get_or_compute(_key(seed=0), compute)
    assert again is first and len(calls) == 1 and cache.hits == 1
    other = cache.get_or_compute(_key(seed=1), compute)
    assert other is not first and len(calls) == 2 and cache.misses == 2


def test_least_recently_used_leaves_first():
    cache = ResultCache(max_entries=2)
    a, b, c = _key(n=1), _key(n=2), _key(n=3)
    cache.put(a, "A")
    cache.put(b, "B")
    assert cache.get(a) == "A"  # a is now the most recent
    cache.put(c, "C")
    assert len(cache) == 2
    assert cache.get(b) is None and cache.get(a) == "A" and cache.get(c) == "C"


def test_disk_copy_survives_a_new_cache(tmp_path):
    curve = EffectCurve(
        "income",
        "numeric",
        np.array([1.0, 2.0]),
        np.array([0.1, 0.2]),
        np.zeros((1, 2)),
        np.array([0]),
        np.array([1]),
        np.array([0.0, 3.0]),
        "output",
        "log-odds of 1",
        20,
        5,
        0,
    )
    key = _key(feature="income")
    ResultCache(folder=tmp_path).put(key, curve)
    assert (tmp_path / f"{key}.pickle").exists()
    fresh = ResultCache(folder=tmp_path)
    loaded = fresh.get_or_compute(key, lambda: pytest.fail("should come from disk"))
    np.testing.assert_array_equal(loaded.pd, curve.pd)
    assert fresh.get(key) is loaded  # kept in memory after the disk hit


def test_damaged_disk_file_is_recomputed(tmp_path):
    key = _key(feature="debt")
    (tmp_path / f"{key}.pickle").write_bytes(b"not a pickle")
    assert ResultCache(folder=tmp_path).get_or_compute(key, lambda: 7) == 7


def test_keys_that_are_not_ours_are_refused(tmp_path):
    with pytest.raises(ValueError):
        ResultCache(folder=tmp_path).get("../elsewhere")
