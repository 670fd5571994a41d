"""Invisible and bidirectional-control characters refused in every string of a case, with the
path (issue 13: a reviewer reads and signs these texts; a bidi control can make a text display
in another order than it is stored). Categories are those of the Unicode Character Database
as Python's unicodedata ships it."""

from __future__ import annotations

import pytest

from schemas import CaseError, validate_case
from schemas.build import MAX_HIDDEN_ERRORS
from schemas.text import hidden_character_errors, hidden_character_problem
from tests.api.support import make_case


@pytest.mark.parametrize("char,category", [
    ("\u202e", "bidirectional"), ("\u2066", "bidirectional"), ("\u200b", "Cf"),
    ("\ufeff", "Cf"), ("\x07", "Cc"), ("\ue000", "Co"), ("\ud800", "Cs"), ("\u0378", "Cn"),
    ("\u2028", "Zl"), ("\u2029", "Zp")])
def test_each_refused_kind_is_named_by_code_point(char, category):
    problem = hidden_character_problem(f"ab{char}c")
    assert problem is not None and f"U+{ord(char):04X}" in problem and category in problem
    assert "position 2" in problem


@pytest.mark.parametrize("text", ["Membrane µ-layer, 5 °C", "Hülle – Kapsel ²", "a\u00a0b",
                                  "日本語", "Ωmega"])
def test_visible_text_of_any_script_passes(text):
    assert hidden_character_problem(text) is None


def test_line_breaks_pass_only_where_a_text_may_have_lines():
    assert hidden_character_problem("one\ntwo\ttab", multiline=True) is None
    assert hidden_character_problem("one\ntwo") is not None


def test_white_space_around_a_document_string_is_let_be_but_not_inside_it():
    assert list(hidden_character_errors({"thickness": "1 mm\n", "title": "\t T "})) == []
    ((path, message),) = hidden_character_errors({"title": " a\nb"})
    assert path == "title" and "U+000A, at position 2" in message


def test_paths_cover_keys_nested_lists_and_values():
    document = {"title": "ok", "layers": [{"name": "ok"}, {"name": "x\u200by"}],
                "tags": ["a", "\u202e"], "odd\u200bkey": 1}
    # A field name is reported as its object is walked, before the values under it.
    assert [path for path, _ in hidden_character_errors(document)] == [
        "odd\u200bkey", "layers[1].name", "tags[1]"]


def test_a_case_with_a_bidi_control_in_a_layer_name_is_refused_naming_the_path():
    case = make_case()
    case["layers"][0]["name"] = "mem\u202ebrane"
    with pytest.raises(CaseError) as caught:
        validate_case(case)
    assert [e["path"] for e in caught.value.errors] == ["layers[0].name"]
    validate_case(make_case())  # the same case without it is valid


def test_the_error_list_is_capped():
    case = make_case(tags=[f"t{i}\u200b" for i in range(500)])
    with pytest.raises(CaseError) as caught:
        validate_case(case)
    assert len(caught.value.errors) == MAX_HIDDEN_ERRORS + 1
    assert "more strings hold refused characters" in caught.value.errors[-1]["message"]


def test_deep_nesting_does_not_exhaust_the_stack():
    deep: object = "x\u200b"
    for _ in range(50_000):
        deep = [deep]
    (found,) = hidden_character_errors({"title": deep})
    assert found[0].startswith("title[0][0]")
