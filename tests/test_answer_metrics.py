"""Answer normalisation, exact match and token F1 by the official SQuAD v1.1 rules.

Source: the official SQuAD v1.1 evaluation script (Rajpurkar et al. 2016,
evaluate-v1.1.py): lower-case, remove punctuation, remove the articles
a/an/the, collapse white space; F1 over bags of tokens; maximum over the
reference answers.  The expected values below are worked by hand from those
rules.
"""
from __future__ import annotations

import pytest

from qacheck.compare import (best_over_references, compare_answers, exact_match, normalize_answer,
                             token_f1)


@pytest.mark.parametrize("text,expected", [
    ("The Cat!", "cat"),
    ("  an   Apple, a pear  ", "apple pear"),
    ("Theatre of the Absurd", "theatre of absurd"),  # 'the' inside a word stays
    ("U.S. Navy", "us navy"),
    ("", ""),
])
def test_normalisation_follows_official_script(text, expected):
    assert normalize_answer(text) == expected


def test_f1_worked_example():
    # prediction "the cat sat" -> [cat, sat]; truth "a cat sat down" -> [cat, sat, down]
    # overlap 2: precision 2/2, recall 2/3, F1 = 2*1*(2/3)/(1+2/3) = 0.8
    assert token_f1("the cat sat", "a cat sat down") == pytest.approx(0.8)


def test_f1_counts_repeated_tokens_once_per_occurrence():
    # [a?] "red red car" vs "red car": common = {red:1, car:1} = 2; P = 2/3, R = 1, F1 = 0.8
    assert token_f1("red red car", "red car") == pytest.approx(0.8)


def test_f1_no_overlap_and_empty():
    assert token_f1("Paris", "London") == 0.0
    assert token_f1("", "London") == 0.0
    assert token_f1("the", "a") == 0.0  # both normalise to nothing


def test_exact_match_and_max_over_references():
    assert exact_match("The Beatles.", "beatles") == 1.0
    assert best_over_references(exact_match, "Denver Broncos", ["Broncos", "Denver Broncos"]) == 1.0
    assert best_over_references(token_f1, "Broncos", ["Denver Broncos", "Carolina"]) == \
        pytest.approx(2 / 3)


@pytest.mark.parametrize("a,b", [
    ("1,200", "1200"), ("1200", "twelve hundred"), ("3 March", "March 3"),
    ("5 km", "5 kilometres"), ("2.5 kilograms", "2500 grams"),
])
def test_same_value_written_differently_agrees(a, b):
    assert compare_answers(a, b).same_value, (a, b)
    assert compare_answers(a, b).score == 1.0


@pytest.mark.parametrize("a,b", [("12", "13"), ("3 March", "4 March"), ("5 km", "5 miles")])
def test_different_values_score_zero(a, b):
    ag = compare_answers(a, b)
    assert not ag.same_value and ag.score == 0.0, (a, b, ag)
