"""Comparing two answers: official SQuAD v1.1 token F1 plus value equivalence.

Normalisation follows the official SQuAD v1.1 evaluation script
(Rajpurkar et al. 2016): lower-case, remove punctuation, drop the articles
a/an/the, collapse white space.  Token F1 alone calls "1,200" and "twelve
hundred" different, so numbers, dates and quantities are also compared as
values (text2num for number words, dateparser for dates, pint for units).
"""
from __future__ import annotations

import datetime as _dt
import re
import string
from collections import Counter
from dataclasses import dataclass
from functools import lru_cache

from rapidfuzz import fuzz

_ARTICLES = re.compile(r"\b(a|an|the)\b")
_PUNCT = set(string.punctuation)


def normalize_answer(s: str) -> str:
    """The official SQuAD v1.1 normalisation."""
    s = s.lower()
    s = "".join(ch for ch in s if ch not in _PUNCT)
    s = _ARTICLES.sub(" ", s)
    return " ".join(s.split())


def exact_match(prediction: str, truth: str) -> float:
    return float(normalize_answer(prediction) == normalize_answer(truth))


def token_f1(prediction: str, truth: str) -> float:
    """SQuAD v1.1 token F1 between two strings (0 when either normalises to nothing).

    The official script returns 0 for an empty side; two empty strings also
    score 0 here, because "no answer" on both sides is handled by the
    no-answer logic, never as agreement of two texts.
    """
    p = normalize_answer(prediction).split()
    t = normalize_answer(truth).split()
    common = Counter(p) & Counter(t)
    same = sum(common.values())
    if same == 0:
        return 0.0
    precision, recall = same / len(p), same / len(t)
    return 2 * precision * recall / (precision + recall)


def best_over_references(metric, prediction: str, truths: list[str]) -> float:
    """Maximum of a metric over reference answers, as the official script does."""
    return max((metric(prediction, t) for t in truths), default=0.0)


# --- values ---------------------------------------------------------------------------

_NUM = re.compile(r"[-+]?\d[\d,]*(?:\.\d+)?")
_DATE_BASE = _dt.datetime(2000, 1, 1)  # fixed, so parsing never depends on today's date
_MONTHS = ("jan", "feb", "mar", "apr", "may", "jun", "jul", "aug", "sep", "oct", "nov", "dec")


@lru_cache(maxsize=4096)
def parse_number(text: str) -> float | None:
    """A number written in digits or words ("1,200", "twelve hundred", "3.5"), else None."""
    t = text.strip().lower().replace("%", " ")
    m = _NUM.fullmatch(t.strip())
    if m:
        try:
            return float(t.replace(",", ""))
        except ValueError:
            return None
    from text_to_num import text2num

    try:
        return float(text2num(t.strip(), "en"))
    except (ValueError, IndexError):
        return None


@lru_cache(maxsize=4096)
def parse_quantity(text: str):
    """A pint quantity for "5 km" / "five kilometres" style text, else None."""
    t = text.strip()
    if not t or not any(ch.isalpha() for ch in t):
        return None
    parts = t.split(maxsplit=1)
    if len(parts) != 2:
        return None
    value = parse_number(parts[0])
    if value is None:
        return None
    ureg = _unit_registry()
    try:
        unit = ureg.parse_units(parts[1].strip().rstrip("."))
    except Exception:  # pint raises several unrelated types for unknown units
        return None
    return ureg.Quantity(value, unit)


@lru_cache(maxsize=1)
def _unit_registry():
    import pint

    return pint.UnitRegistry()


@lru_cache(maxsize=4096)
def parse_date(text: str):
    """A date for text that names a month or a year-like number, else None."""
    low = text.lower()
    if not any(m in low for m in _MONTHS) and not re.search(r"\b(1[5-9]|20)\d\d\b", low):
        return None
    import dateparser

    parsed = dateparser.parse(text, languages=["en"],
                              settings={"PREFER_DAY_OF_MONTH": "first",
                                        "RELATIVE_BASE": _DATE_BASE,
                                        "REQUIRE_PARTS": ["year"] if not any(
                                            m in low for m in _MONTHS) else []})
    if parsed is None:
        return None
    return parsed.date()



@dataclass(frozen=True)
class Agreement:
    """How two answers relate: token F1 and whether they name the same value."""

    f1: float
    same_value: bool
    kind: str  # "text", "number", "quantity" or "date"

    @property
    def score(self) -> float:
        """1 for the same value or text; 0 for two different values; token F1 otherwise."""
        if self.same_value:
            return 1.0
        return 0.0 if self.kind != "text" else self.f1


def compare_answers(a: str, b: str) -> Agreement:
    """Token F1 of two answers, upgraded to agreement when they name the same value.

    Values decide both ways: "5 km" vs "5 kilometres" agree, but "12" vs "13"
    (F1 0) stay different and "March 3" vs "March 4" (F1 0.5) score 0 as two
    different dates.
    """
    f1 = token_f1(a, b)
    na_, nb_ = normalize_answer(a), normalize_answer(b)
    if na_ == nb_:
        return Agreement(1.0, True, "text")
    qa_, qb = parse_quantity(a), parse_quantity(b)
    if qa_ is not None and qb is not None:
        try:
            same = abs(qa_.to(qb.units).magnitude - qb.magnitude) <= 1e-6 * max(1.0, abs(qb.magnitude))
            return Agreement(f1, same, "quantity")
        except Exception:  # incompatible dimensions: not the same value
            return Agreement(f1, False, "quantity")
    na, nb = parse_number(a), parse_number(b)
    if na is not None and nb is not None:
        return Agreement(f1, na == nb, "number")
    da, db = parse_date(a), parse_date(b)
    if da is not None and db is not None:
        return Agreement(f1, da == db, "date")
    # one answer names the other less specifically ("the authority" / "Port of Caldreth
    # Authority"): rapidfuzz's token-set ratio is 100 exactly when one token set holds the other
    if na_ and nb_ and fuzz.token_set_ratio(na_, nb_) == 100:
        return Agreement(f1, True, "text")
    return Agreement(f1, False, "text")
