"""Values inside an answer: numbers, percentages, money, quantities, times of day and dates.

An answer such as "80,000 crowns" or "six votes to three" holds values inside a
phrase; comparing it word by word calls "80,000 crowns" and "8,000 crowns" half
the same.  This module finds every value in a piece of text with well-kept
parsers (text2num for number words, dateparser for dates and times, pint for
units) and compares two answers value by value:

* the same value written differently agrees ("9:20 pm" / "21:20", "five km" / "5,000 m");
* a different value of the same family is a conflict ("412 calls" / "517 calls");
* dates compare at the precision both sides share ("April" / "April 2026" agree);
* a value written with fewer digits agrees with one that rounds to it
  ("14 million" / "14.2 million"), because a summary may round.
"""
from __future__ import annotations

import datetime as _dt
import re
from dataclasses import dataclass
from functools import lru_cache
from typing import Literal

from qacheck.words import stem, stop_words

ValueFamily = Literal["amount", "time", "date"]
#: what a qualifier before a number makes of it
Bound = Literal["exact", "at_least", "at_most", "about"]
#: qualifiers of English, read right before a number (a table of words, not a parser)
_QUALIFIERS: dict[str, Bound] = {
    "more than": "at_least", "over": "at_least", "at least": "at_least", "upwards of": "at_least",
    "in excess of": "at_least", "above": "at_least", "less than": "at_most", "fewer than": "at_most",
    "under": "at_most", "up to": "at_most", "at most": "at_most", "below": "at_most",
    "about": "about", "around": "about", "some": "about", "roughly": "about", "nearly": "about",
    "almost": "about", "approximately": "about", "close to": "about", "an estimated": "about",
    "estimated": "about", "circa": "about"}
_QUALIFIER_RE = re.compile(r"\b(" + "|".join(sorted(_QUALIFIERS, key=len, reverse=True))
                           + r")\s*[$€£¥]?\s*$", re.I)
#: how far "about N" may stray from N and still be N
ABOUT_TOLERANCE = 0.1

#: how much a word after a number multiplies it; a table of English words, not a parser
_SCALES = {"thousand": 1e3, "million": 1e6, "billion": 1e9, "trillion": 1e12,
           "k": 1e3, "m": 1e6, "mn": 1e6, "bn": 1e9, "tn": 1e12}
#: "14 million" must reach the number search whole; alpha2digit would make it "14 1000000"
_DIGIT_SCALE = re.compile(r"(\d)\s*(thousand|million|billion|trillion)\b", re.I)
_SCALE_ABBR = {"thousand": "k", "million": "mn", "billion": "bn", "trillion": "tn"}
_CURRENCY_SYMBOLS = {"$": "dollar", "€": "euro", "£": "pound", "¥": "yen"}
#: currency names (singular stems); any other word after a number is tried as a pint unit
_CURRENCY_WORDS = ("dollar", "euro", "pound", "crown", "krona", "krone", "kronor", "yen", "franc",
                   "rupee", "peso", "yuan", "mark", "cent", "pence", "shilling", "dinar", "rand",
                   "lira", "real", "ruble", "rouble", "won", "zloty", "usd", "eur", "gbp")
_MONTH = (r"jan(?:uary)?|feb(?:ruary)?|mar(?:ch)?|apr(?:il)?|may|june?|july?|aug(?:ust)?|"
          r"sep(?:t(?:ember)?)?|oct(?:ober)?|nov(?:ember)?|dec(?:ember)?")
_MONTH_RE = re.compile(rf"\b({_MONTH})\b\.?", re.I)
_YEAR_RE = re.compile(r"(?<![\d,.])(1[5-9]\d\d|20\d\d)(?![\d,])")
_TIME_RE = re.compile(r"\b\d{1,2}(?:[:.]\d{2})?\s*(?:a\.?m\b\.?|p\.?m\b\.?)|\b\d{1,2}:\d{2}\b|\bnoon\b|"
                      r"\bmidnight\b", re.I)
_NUMBER_RE = re.compile(
    r"(?P<cur>[$€£¥])?\s?(?P<num>\d[\d,]*(?:\.\d+)?)(?P<ord>st|nd|rd|th)?"
    r"(?:\s?(?P<scale>thousand|million|billion|trillion|bn|mn|tn|k|m)\b)?"
    r"(?:\s?(?P<pct>%|percent\b|per\s?cent\b|percentage points?\b))?"
    r"(?:\s+(?P<unit>[A-Za-z][A-Za-z/²³.-]*))?", re.I)
_DATE_BASE = _dt.datetime(2000, 1, 1)  # fixed, so parsing never depends on today's date


@dataclass(frozen=True)
class Value:
    """One value found in a text.

    ``family`` says which values can be compared at all; ``amount`` is the
    magnitude in base units (amounts), minutes after midnight (times) or a
    (year, month, day) tuple with None for what the text leaves out (dates);
    ``unit`` is the currency, the pint dimensionality, "percent" or "";
    ``step`` is the precision the text was written to (amounts only).
    For amounts also: ``written``, the number as written before any unit
    conversion (so "18" can meet "18 months"); ``ordinal`` for "5th";
    ``bound``, what a qualifier before the number makes of it ("more than" ->
    ``at_least``, "under" -> ``at_most``, "about" -> ``about``); and ``noun``,
    the stem of the word a unitless number counts ("412 vessel calls" -> vessel).
    """

    family: ValueFamily
    amount: float | tuple[int | None, int | None, int | None]
    unit: str
    step: float = 0.0
    half_day: bool = False  # a time written without am/pm or a 24-hour clock
    written: float = 0.0
    ordinal: bool = False
    bound: Bound = "exact"
    noun: str = ""


def _step(num_text: str, scale: float) -> float:
    """The precision a number was written to: "14" million -> 1e6, "14.2" million -> 1e5."""
    frac = num_text.split(".")[1] if "." in num_text else ""
    return scale * 10.0 ** (-len(frac))


@lru_cache(maxsize=1)
def _units():
    import pint

    return pint.UnitRegistry()


def _unit_of(word: str) -> tuple[str, float] | None:
    """(dimensionality, factor to base units) for a unit word pint knows, else None."""
    w = word.strip(".").lower()
    if len(w) < 1 or w in ("a", "an", "the", "of", "to", "and", "or", "in", "at", "on", "by"):
        return None
    ureg = _units()
    try:
        q = ureg.Quantity(1.0, ureg.parse_units(w))
        base = q.to_base_units()
    except Exception:  # pint raises several unrelated types for words that are not units
        return None
    dim = str(base.dimensionality)
    if dim == "dimensionless":
        return None
    return dim, float(base.magnitude)


def _currency(word: str) -> str | None:
    w = word.lower().strip(".")
    for c in _CURRENCY_WORDS:
        if w == c or w == c + "s" or w == c + "es":
            return c
    return None


def _times(text: str) -> tuple[list[Value], list[tuple[int, int]]]:
    import dateparser

    out, taken = [], []
    for m in _TIME_RE.finditer(text):
        t = m.group(0)
        low = t.lower()
        if low == "noon":
            minutes, half = 12 * 60, False
        elif low == "midnight":
            minutes, half = 0, False
        else:
            parsed = dateparser.parse(t.replace(".", ":", 1) if re.match(r"\d{1,2}\.\d{2}", t) else t,
                                      languages=["en"], settings={"RELATIVE_BASE": _DATE_BASE})
            if parsed is None:
                continue
            minutes = parsed.hour * 60 + parsed.minute
            half = not re.search(r"[ap]\.?m", low) and parsed.hour <= 12
        out.append(Value("time", float(minutes), "", half_day=half))
        taken.append(m.span())
    return out, taken


def _dates(text: str) -> tuple[list[Value], list[tuple[int, int]]]:
    """Dates that name a month or a year, with the parts the text actually gives."""
    from dateparser.search import search_dates

    found = search_dates(text, languages=["en"],
                         settings={"RELATIVE_BASE": _DATE_BASE, "PREFER_DAY_OF_MONTH": "first"}) or []
    out, spans = [], []
    pos = 0
    for sub, when in found:
        start = text.find(sub, pos)
        if start < 0:
            continue
        pos = start + len(sub)
        month = _MONTH_RE.search(sub)
        if month and month.group(1).lower() == "may" and not month.group(1)[0].isupper():
            month = None  # the modal verb "may"
        year = _YEAR_RE.search(sub)
        if not month and not year:
            continue  # "now", "second", "to": not a date the text states
        rest = _MONTH_RE.sub(" ", _YEAR_RE.sub(" ", _TIME_RE.sub(" ", sub)))
        day = bool(month) and re.search(r"\b\d{1,2}(?:st|nd|rd|th)?\b", rest) is not None
        parts = (when.year if year else None, when.month if month else None,
                 when.day if day else None)
        out.append(Value("date", parts, ""))
        spans.append((start, start + len(sub)))
    return out, spans


def _amounts(text: str, taken: list[tuple[int, int]]) -> list[Value]:
    out = []
    for m in _NUMBER_RE.finditer(text):
        if any(a < m.end("num") and m.start("num") < b for a, b in taken):
            continue
        num_text = m.group("num").replace(",", "")
        try:
            number = float(num_text)
        except ValueError:
            continue
        scale_word, unit_word = (m.group("scale") or "").lower(), m.group("unit") or ""
        if scale_word in ("m", "k") and not m.group("cur"):
            # "46m" is 46 metres, "£15m" 15 million: the short forms scale only money
            unit_word, scale_word = scale_word, ""
        scale = _SCALES.get(scale_word, 1.0)
        amount, step = number * scale, _step(num_text, scale)
        if m.group("pct"):
            unit = "percent"
        elif m.group("cur"):
            unit = _CURRENCY_SYMBOLS[m.group("cur")]
        elif _currency(unit_word):
            unit = _currency(unit_word)
        elif unit_word and (u := _unit_of(unit_word)) is not None and not m.group("ord"):
            unit, factor = u
            amount, step = amount * factor, step * factor
        else:
            unit = ""
        q = _QUALIFIER_RE.search(text[max(0, m.start() - 24):m.start("num")])
        noun = ""
        if not unit and unit_word and unit_word.lower() not in stop_words():
            noun = stem(unit_word.lower())
        out.append(Value("amount", amount, unit, step, written=number * scale,
                         ordinal=bool(m.group("ord")),
                         bound=_QUALIFIERS[q.group(1).lower()] if q else "exact", noun=noun))
    return out


@lru_cache(maxsize=8192)
def extract_values(text: str) -> tuple[Value, ...]:
    """Every value in ``text``: times, then dates, then amounts in what is left.

    Number words become digits first (text2num's ``alpha2digit``, every
    number, however small), so "seven votes to two" holds 7 and 2.
    """
    from text_to_num import alpha2digit

    text = _DIGIT_SCALE.sub(lambda m: f"{m.group(1)} {_SCALE_ABBR[m.group(2).lower()]}", text)
    text = alpha2digit(text, "en", threshold=0)
    if not any(ch.isdigit() for ch in text) and not _MONTH_RE.search(text) \
            and not re.search(r"\b(noon|midnight)\b", text, re.I):
        return ()
    times, taken = _times(text)
    dates, date_spans = _dates(text)
    return tuple(times + dates + _amounts(text, taken + date_spans))


def _same_amount(a: Value, b: Value) -> bool | None:
    """Equal within the precision either side was written to, or within what a qualifier
    allows; None when the two cannot be compared.

    Not comparable: units of different kinds, an ordinal and a count ("2" / "fifth"), and two
    unitless numbers that count different things ("second half" / "77th minute").  A number
    with a unit on one side only is compared as written ("18" / "18 months").
    """
    if a.unit != b.unit and a.unit and b.unit:
        if a.unit in _CURRENCY_WORDS and b.unit in _CURRENCY_WORDS:
            return False  # two currencies: not the same amount
        return None
    if a.ordinal != b.ordinal or (a.noun and b.noun and a.noun != b.noun):
        return None
    x, y = (a.amount, b.amount) if a.unit == b.unit else (a.written, b.written)
    tol = max(a.step, b.step) / 2 + 1e-9 * max(abs(x), abs(y), 1.0)
    if abs(x - y) <= tol:
        return True
    for p, q, other in ((a, x, y), (b, y, x)):
        if p.bound == "at_least" and other >= q - tol or p.bound == "at_most" and other <= q + tol:
            return True
        if p.bound == "about" and abs(other - q) <= ABOUT_TOLERANCE * abs(q) + tol:
            return True
    return False


def _same_time(a: Value, b: Value) -> bool:
    if a.half_day or b.half_day:
        return (a.amount - b.amount) % 720 == 0
    return a.amount == b.amount


def _same_date(a: Value, b: Value) -> bool | None:
    """Equal on every part both dates give; None when they share no part ("April" / "2015")."""
    shared = [(x, y) for x, y in zip(a.amount, b.amount) if x is not None and y is not None]
    if not shared:
        return None
    return all(x == y for x, y in shared)


_SAME = {"amount": _same_amount, "time": _same_time, "date": _same_date}

ValueVerdict = Literal["same", "conflict"]


def compare_values(a: tuple[Value, ...], b: tuple[Value, ...]
                   ) -> tuple[ValueVerdict | None, ValueFamily | None]:
    """Compare the values of two answers family by family.

    Within a family the answers agree when every value of one side has an
    equal value on the other (so "3" agrees with "3 to 5", a less specific
    answer); otherwise they conflict.  Returns (None, None) when no family
    has comparable values on both sides.
    """
    verdict: ValueVerdict | None = None
    family_seen: ValueFamily | None = None
    for family in ("time", "date", "amount"):
        xs = [v for v in a if v.family == family]
        ys = [v for v in b if v.family == family]
        if not xs or not ys:
            continue
        same = _SAME[family]
        table = [[same(x, y) for y in ys] for x in xs]
        if all(r is None for row in table for r in row):
            continue
        family_seen = family_seen or family
        a_in_b = all(any(r for r in row) for row in table if any(r is not None for r in row))
        b_in_a = all(any(table[i][j] for i in range(len(xs)))
                     for j in range(len(ys)) if any(table[i][j] is not None for i in range(len(xs))))
        if a_in_b or b_in_a:
            verdict = verdict or "same"
            continue
        return "conflict", family
    return verdict, family_seen
