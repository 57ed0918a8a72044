"""Property-based: malformed or mutated design files never end in a traceback.

At least 10^4 mutated files go through ``cablekit check`` (in-process, same code path as the
console command): each must end in a validation list on stderr and exit code 3.
"""

from __future__ import annotations

import contextlib
import copy
import io
import tomllib

import pytest
import tomli_w
from hypothesis import HealthCheck, assume, given, settings
from hypothesis import strategies as st

from cablekit.cli import main
from cablekit.design import DesignError, loads_design

from conftest import example_paths

BASES = [tomllib.loads(p.read_text()) for p in example_paths()]

# keys whose removal always makes a design invalid
REQUIRED = [
    ("meta",), ("meta", "name"), ("frame",), ("frame", "exits"), ("platform",), ("platform", "kind"),
    ("platform", "mass"), ("cable",), ("cable", "diameter"), ("cable", "breaking_force"),
    ("cable", "mass_per_length"), ("cable", "min_tension"), ("payload",), ("payload", "mass"), ("task",),
    ("home",), ("home", "position"), ("winch", "drum_diameter"), ("winch", "gear_ratio"), ("winch", "efficiency"),
    ("winch", "encoder_lines"), ("winch", "decoding"), ("winch", "deadband_counts"), ("winch", "count_rate_limit"),
    ("winch", "motor_rated_torque"), ("winch", "motor_peak_torque"), ("winch", "motor_rated_speed"),
    ("winch", "drum_width"),
]

# values that no numeric field accepts (quantities, plain numbers and vectors alike)
GARBAGE = st.sampled_from([
    float("nan"), float("inf"), -float("inf"), "nan m", "inf N", "1e999 m", "1e308 km", "12 furlongz", "",
    "   ", "m", "3 kg m s", "0x10 m", {"a": 1}, [], [1, "x"], True, "1 m; rm -rf /", "__import__('os') m",
    "2 m 3 m", "1..2 m", "-", "🙂 kg", "1e-400000 m" + "x", None,
])
HUGE_TEXT = st.text(min_size=200, max_size=400)

NUMERIC_LEAVES = [
    ("platform", "mass"), ("cable", "diameter"), ("cable", "breaking_force"), ("cable", "mass_per_length"),
    ("cable", "min_tension"), ("payload", "mass"), ("winch", "drum_diameter"), ("winch", "gear_ratio"),
    ("winch", "efficiency"), ("winch", "encoder_lines"), ("winch", "decoding"), ("winch", "motor_rated_torque"),
    ("winch", "motor_rated_speed"), ("winch", "count_rate_limit"), ("home", "position"), ("task", "step"),
    ("frame", "exits", 0, "position"), ("frame", "exits", 1, "position"), ("task", "box_lower"),
]


def _get(doc, path):
    for k in path[:-1]:
        doc = doc[k]
    return doc


def _apply(doc, mutation):
    kind, path, value = mutation
    if kind == "unknown":
        target = doc
        for k in path:
            target = target.get(k) if isinstance(target, dict) else None
        if isinstance(target, dict):
            target[f"zz_{value}"] = 1
            return True
        return False
    try:
        parent = _get(doc, path)
    except (KeyError, IndexError, TypeError):
        return False
    last = path[-1]
    if kind == "delete":
        if isinstance(parent, dict) and last in parent:
            del parent[last]
            return True
        return False
    if kind == "set":
        if isinstance(parent, dict) and last in parent:
            parent[last] = value
            return True
        if isinstance(parent, list) and isinstance(last, int) and last < len(parent):
            parent[last] = value
            return True
        return False
    if kind == "scalar_table":
        if isinstance(parent, dict) and last in parent and isinstance(parent[last], (dict, list)):
            parent[last] = value
            return True
        return False
    raise AssertionError(kind)


mutation = st.one_of(
    st.tuples(st.just("delete"), st.sampled_from(REQUIRED), st.none()),
    st.tuples(st.just("set"), st.sampled_from(NUMERIC_LEAVES), GARBAGE),
    st.tuples(st.just("set"), st.sampled_from(NUMERIC_LEAVES), HUGE_TEXT),
    st.tuples(st.just("unknown"), st.sampled_from([(), ("meta",), ("cable",), ("winch",), ("task",), ("frame",)]),
              st.from_regex(r"[a-z]{1,8}", fullmatch=True)),
    st.tuples(st.just("scalar_table"), st.sampled_from([("cable",), ("platform",), ("task",), ("frame", "exits"),
                                                        ("winch",), ("payload",)]),
              st.sampled_from([1, "text", 2.5, True])),
)


def _dump(doc) -> str:
    def clean(x):  # TOML has no null: write None as an empty inline table so the field is wrong
        if isinstance(x, dict):
            return {k: clean(v) for k, v in x.items()}
        if isinstance(x, list):
            return [clean(v) for v in x]
        return {} if x is None else x

    return tomli_w.dumps(clean(doc))


@pytest.mark.slow
@settings(max_examples=10_000, deadline=None, derandomize=True,
          suppress_health_check=[HealthCheck.too_slow, HealthCheck.function_scoped_fixture])
@given(base=st.integers(0, len(BASES) - 1), mutations=st.lists(mutation, min_size=1, max_size=4))
def test_mutated_designs_give_a_validation_list_and_exit_3(base, mutations, tmp_path_factory):
    doc = copy.deepcopy(BASES[base])
    applied = sum(_apply(doc, m) for m in mutations)
    assume(applied)  # every mutation missed its target (e.g. a [winch] key on a [[winches]] design)
    path = tmp_path_factory.getbasetemp() / "fuzz.toml"
    path.write_text(_dump(doc))
    out, err = io.StringIO(), io.StringIO()
    with contextlib.redirect_stdout(out), contextlib.redirect_stderr(err):
        code = main(["check", str(path)])
    text = err.getvalue()
    assert code == 3, (mutations, out.getvalue(), text)
    assert "problem" in text and "\n  - " in text
    assert "Traceback" not in text and "internal error" not in text


@settings(max_examples=500, deadline=None, derandomize=True)
@given(st.text(max_size=400))
def test_arbitrary_text_is_rejected_cleanly(text):
    try:
        loads_design(text)
    except DesignError as exc:
        assert exc.problems
    # (an arbitrary text that happens to be a valid design would be fine too)


@settings(max_examples=300, deadline=None, derandomize=True)
@given(st.dictionaries(st.sampled_from(["meta", "frame", "platform", "cable", "winch", "payload", "task", "home",
                                        "extra"]),
                       st.recursive(st.one_of(st.integers(), st.floats(), st.text(max_size=10), st.booleans()),
                                    lambda c: st.lists(c, max_size=3) | st.dictionaries(st.text(max_size=5), c,
                                                                                         max_size=3), max_leaves=8)))
def test_random_documents_never_crash(doc):
    with pytest.raises(DesignError):
        loads_design(_dump(doc))
