"""Strict JSON parsing of request bodies."""

from __future__ import annotations

import pytest

from service.errors import MalformedBody, ValidationFailed
from service.jsonbody import MAX_JSON_DEPTH, nesting_depth_exceeds, parse_strict_json


def test_plain_json_is_parsed():
    assert parse_strict_json(b'{"a": [1, 2.5, {"b": null}]}') == {"a": [1, 2.5, {"b": None}]}


def test_every_non_finite_literal_is_named_with_its_path():
    with pytest.raises(ValidationFailed) as caught:
        parse_strict_json(b'{"a": NaN, "b": [1, {"c": -Infinity}], "d": 1e400}')
    assert [e["path"] for e in caught.value.errors] == ["a", "b[1].c", "d"]


@pytest.mark.parametrize("data", [b"", b"   ", b"{", b"{'a': 1}", b"\xff\xfe",
                                  b'{"a": 1, "a": 2}'])
def test_malformed_bodies_are_400(data):
    with pytest.raises(MalformedBody):
        parse_strict_json(data)


def test_the_depth_scan_counts_brackets_outside_strings_only():
    deep = "[" * (MAX_JSON_DEPTH + 1) + "]" * (MAX_JSON_DEPTH + 1)
    at_limit = "[" * MAX_JSON_DEPTH + "]" * MAX_JSON_DEPTH
    assert nesting_depth_exceeds(deep) is True
    assert nesting_depth_exceeds(at_limit) is False
    quoted = '["\\"' + "[" * 100 + '", ' + "{}, " * 100 + "1]"  # an escaped quote inside
    assert nesting_depth_exceeds(quoted) is False
    assert nesting_depth_exceeds('["\\"", ' + deep + "]") is True


def test_a_lone_surrogate_in_a_key_is_named():
    with pytest.raises(ValidationFailed) as caught:
        parse_strict_json(b'{"a": {"\\udc00": 1}}')
    assert caught.value.errors[0]["path"].startswith("a.")
