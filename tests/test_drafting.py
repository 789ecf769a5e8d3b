"""Question drafting: both drafters ask about the span without giving it away, and round-trip."""
from __future__ import annotations

import pytest

from qacheck.answer_match import token_f1
from qacheck.drafting import keeps_to_sentence, rule_question
from qacheck.segment import Span, segment

SENTENCES = [
    "Harbour master Ilse Marrow opened the north basin in April 2025.",
    "The Grell Quay terminal can board 900 passengers an hour.",
    "The consortium abolished late fines for children's books in 2025.",
    "Archivist Yara Hollis digitised about 9,000 photographs.",
    "The mobile library visits Ashgrove every second Thursday.",
    "Repairs to the crane rail at berth 7 will cost 80,000 crowns.",
]

#: share of spans whose question must lead the QA model back to the span (issue target
#: for the final drafter is 0.95 on SQuAD dev; on these short invented sentences we
#: require the same of the rule-based drafter alone)
ROUND_TRIP_FLOOR = 0.8


def _spans():
    out = []
    for text in SENTENCES:
        for sent in segment(text):
            out += [(sent.text, sp) for sp in sent.spans]
    return out


def test_spans_are_found_and_trivial_words_dropped():
    spans = [sp.text.lower() for _, sp in _spans()]
    assert "ilse marrow" in spans and "april 2025" in spans and "900" in spans
    assert not {"the", "it", "they", "an"} & set(spans)


def test_rule_questions_are_questions_without_the_answer():
    for sentence, span in _spans():
        q = rule_question(sentence, span)
        assert q.endswith("?"), q
        assert span.text.lower() not in q.lower(), (span.text, q)


@pytest.mark.parametrize("span,question", [
    (Span("Ilse Marrow", 0, 11, "PERSON", "nsubj"), "Who opened the north basin in April 2025?"),
    (Span("April 2025", 38, 48, "DATE", "pobj", "in"), "Ilse Marrow opened the north basin when?"),
    (Span("north basin", 23, 34, "CHUNK", "dobj", "", 19, 34), "Ilse Marrow opened what in April 2025?"),
])
def test_rule_question_examples(span, question):
    sentence = "Ilse Marrow opened the north basin in April 2025."
    assert sentence[span.start:span.end] == span.text
    assert rule_question(sentence, span) == question


def test_modifier_span_asks_which():
    sentence = "Orla Vance opened the Brennock depot."
    span = Span("Brennock", 22, 30, "ORG", "compound", "", 18, 36, "depot")
    assert rule_question(sentence, span) == "Orla Vance opened which depot?"


def test_seq2seq_question_must_keep_to_its_sentence():
    sentence = "The Port of Caldreth Authority handled 517 vessel calls in January 2026."
    assert keeps_to_sentence("How many vessel calls did the authority handle?", sentence)
    assert keeps_to_sentence("How many ships did the authority handle?", sentence)  # one synonym
    assert not keeps_to_sentence("How many ships did the marshall islands serve in 2012?", sentence)


def _round_trip_share(questions, qa_model):
    answers = qa_model.answer([(q, s) for q, (s, _) in zip(questions, _spans())])
    ok = [a.has_answer and a.no_answer_prob <= 0.5 and token_f1(a.text, sp.text) >= 0.5
          for a, (_, sp) in zip(answers, _spans())]
    return sum(ok) / len(ok)


def test_rule_questions_round_trip(qa_model):
    qs = [rule_question(s, sp) for s, sp in _spans()]
    assert _round_trip_share(qs, qa_model) >= ROUND_TRIP_FLOOR


def test_seq2seq_questions_are_questions_and_mostly_round_trip(checker, qa_model):
    if checker.qg is None:
        pytest.skip("no seq2seq drafter shipped")
    qs = checker.qg.generate([(s, sp.start, sp.end) for s, sp in _spans()])
    assert all(q.endswith("?") for q in qs), qs
    # the seq2seq drafter alone is held to a lower floor: the rule-based drafter backs it
    assert _round_trip_share(qs, qa_model) >= 0.5, qs
