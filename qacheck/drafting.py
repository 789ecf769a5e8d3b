"""Rule-based question drafter: the answer span becomes a wh-phrase, in situ.

"Orla Vance opened the Brennock depot in March 2024." with the span
"March 2024" becomes "Orla Vance opened the Brennock depot when?"; the span
"Orla Vance" becomes "Who opened the Brennock depot in March 2024?".  Such
in-situ questions keep every other word of the sentence, which is what the
QA model needs to find the matching fact in the source.  Deterministic, fast,
and a question for every span: the fallback behind the seq2seq drafter.
"""
from __future__ import annotations

import re

from qacheck.segment import Span
from qacheck.words import novel_words

_LEADING_MARKERS = re.compile(
    r"^(however|also|in addition|additionally|meanwhile|moreover|furthermore|but|and|so|"
    r"overall|in total|in short|finally)\s*,?\s+", re.IGNORECASE)
_PLACE = {"GPE", "LOC", "FAC"}
_TIME = {"DATE", "TIME"}
_AMOUNT = {"MONEY", "QUANTITY"}
_COUNT = {"CARDINAL", "NUM"}
_PLACE_PREPS = {"in", "at", "near", "inside", "outside"}
_TIME_PREPS = {"in", "on", "at", "during"}


def wh_phrase(span: Span) -> tuple[str, bool]:
    """The wh-phrase for a span, and whether it replaces the preposition before it too."""
    if span.kind == "PERSON":
        return "who", False
    if span.kind in _TIME:
        return "when", span.head_prep in _TIME_PREPS
    if span.kind in _PLACE and span.head_prep in _PLACE_PREPS:
        return "where", True
    if span.kind in _AMOUNT:
        return "how much", False
    if span.kind in _COUNT:
        return "how many", False
    if span.kind == "PERCENT":
        return "what percentage", False
    if span.kind == "ORDINAL":
        return "which", False
    return "what", False


#: a seq2seq question may use this many content words its sentence does not have (a synonym)
MAX_NEW_WORDS = 1


def keeps_to_sentence(question: str, sentence: str) -> bool:
    """True when the question brings at most ``MAX_NEW_WORDS`` content words of its own.

    A question about "the marshall islands in january 2012" drafted from a
    sentence about a harbour in 2026 can still lead the QA model back to the
    span on the output, yet asks the source about something else entirely.
    """
    return len(novel_words(question, sentence)[0]) <= MAX_NEW_WORDS


def rule_question(sentence: str, span: Span) -> str:
    """An in-situ question whose answer is ``span`` (a span of ``sentence``)."""
    wh, eat_prep = wh_phrase(span)
    a, b = (span.ask_start, span.ask_end) if span.ask_start >= 0 else (span.start, span.end)
    if span.ask_head:
        # the span modifies a noun phrase: ask which one ("whose" for a possessor person)
        owner = span.kind == "PERSON" and span.dep == "poss"
        wh, eat_prep = f"{'whose' if owner else 'which'} {span.ask_head}", False
    before, after = sentence[:a], sentence[b:]
    if eat_prep:
        m = re.search(r"\b" + re.escape(span.head_prep) + r"\s+$", before, re.IGNORECASE)
        if m:
            before = before[: m.start()]
    text = f"{before}{wh}{after}"
    text = _LEADING_MARKERS.sub("", text.strip())
    text = re.sub(r"\s+", " ", text).strip()
    text = re.sub(r"\s+([,;:])", r"\1", text)
    text = text.rstrip(" .!?;:,")
    if text.startswith(wh):
        text = wh[0].upper() + text[1:]
    return text + "?"


def span_at(doc, a: int, b: int) -> Span:
    """A drafter Span for characters [a, b) of a parsed sentence (entity label when it is one).

    Used where the answer is given rather than found by ``segment``: SQuAD
    answers in the QG evaluation and in the QA model's in-situ training data.
    """
    sp = doc.char_span(a, b, alignment_mode="expand")
    kind = "CHUNK"
    for ent in doc.ents:
        if ent.start_char <= a and b <= ent.end_char:
            kind = ent.label_
            break
    if sp is None:
        return Span(doc.text[a:b], a, b, kind)
    root = sp.root
    prep = root.head.text.lower() if root.dep_ == "pobj" and root.head.dep_ == "prep" else ""
    return Span(doc.text[a:b], a, b, kind, root.dep_, prep)
