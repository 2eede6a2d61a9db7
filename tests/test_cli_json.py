"""The command line's JSON writer against the standard library's encoder.

The writer has the json module's C encoder write each entry, numpy's values made plain
for it, and replaces the NaN and infinities it writes with null, outside strings; the
text must parse to what ``json.dumps`` of a plainly cleaned copy gives (reference:
Python's json module, RFC 8259, which has no NaN)."""

import io
import json
import math

import numpy as np
from hypothesis import given, settings
from hypothesis import strategies as st

from engine.cli import _write_json


def reference_clean(value):
    """What JSON can hold, one value at a time, without shortcuts."""
    if isinstance(value, dict):
        return {k: reference_clean(v) for k, v in value.items()}
    if isinstance(value, list | tuple):
        return [reference_clean(v) for v in value]
    if isinstance(value, float):
        return value if math.isfinite(value) else None
    return value


leaves = st.one_of(
    st.floats(allow_nan=True, allow_infinity=True),
    st.floats(min_value=1e307, max_value=1.7e308),  # finite, but their sum overflows
    st.integers(-(10**6), 10**6),
    st.booleans(),
    st.none(),
    st.text(max_size=8),
    st.sampled_from(["NaN", "-Infinity", 'x"NaN', "\\", '\\"', "Infinity\\"]),
)
values = st.recursive(
    leaves,
    lambda inner: st.one_of(
        st.lists(inner, max_size=6),
        st.dictionaries(st.one_of(st.text(max_size=5), st.just("NaN")), inner, max_size=4),
    ),
    max_leaves=30,
)


def refuse(token: str):
    raise AssertionError(f"{token} is not JSON (RFC 8259)")


def written(value) -> str:
    out = io.StringIO()
    _write_json(value, out)
    return out.getvalue()


@settings(max_examples=300, deadline=None)
@given(values)
def test_written_json_parses_to_the_plainly_cleaned_value(value):
    text = written(value)
    assert json.loads(text, parse_constant=refuse) == json.loads(json.dumps(reference_clean(value)))
    assert "\n" not in text
    assert text == json.dumps(json.loads(text))  # spaced as json.dumps spaces it


def test_numpy_values_become_plain_numbers():
    value = {
        "a": np.float64("nan"),
        "b": [np.int64(3), np.bool_(True)],
        "c": np.array([1.0, np.inf]),
    }
    assert json.loads(written(value)) == {"a": None, "b": [3, True], "c": [1.0, None]}


def test_a_list_of_huge_finite_numbers_keeps_them():
    assert json.loads(written([1.7e308, 1.7e308, -1.0])) == [1.7e308, 1.7e308, -1.0]


def test_text_that_reads_like_a_non_finite_number_stays_text():
    value = {"NaN": ["NaN", float("nan"), '"-Infinity"', "a\\", -math.inf], "b": 'x\\"NaN'}
    assert json.loads(written(value)) == {
        "NaN": ["NaN", None, '"-Infinity"', "a\\", None],
        "b": 'x\\"NaN',
    }


def test_what_json_cannot_hold_is_refused_as_before():
    import pytest

    with pytest.raises(TypeError):
        written({"a": object()})
