"""Strict JSON parsing of request bodies."""

from __future__ import annotations

import pytest

from service.errors import MalformedBody, ValidationFailed
from service.jsonbody import parse_strict_json


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
