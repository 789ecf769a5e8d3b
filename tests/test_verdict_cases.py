"""Worked examples of the verdict, each an error a reviewer of generated text must not miss.

The pairs are invented (a harbour town, Caldreth); each reproduces a case that
once passed as supported.  The kinds of error follow the published taxonomies
of summary errors (intrinsic: contradicted by the source; extrinsic: not in
it; Maynez et al. 2020) and the edit types of SummEdits (entity swaps,
antonyms, negations; Laban et al. 2023).
"""
from __future__ import annotations

import pytest

from qacheck.results import FLAGGED

MEETING = "The meeting opened at 7:05 pm and closed at 9:20 pm."
CONTRADICTIONS = [
    # (source, output, the value the source gives, which a fix should quote; "a|b": either)
    (MEETING, "The meeting closed at 10:45 pm.", "9:20 pm"),
    ("The harbour authority paid a fine of 80,000 crowns after the spill.",
     "The harbour authority paid a fine of 8,000 crowns after the spill.", "80,000"),
    ("The dredging contract for the outer basin is worth 14 million crowns.",
     "The dredging contract for the outer basin is worth 41 million crowns.", "14 million"),
    ("Caldreth recorded 412 vessel calls in the first quarter.",
     "Caldreth recorded 517 vessel calls in the first quarter.", "412"),
    ("The council approved the dredging budget by six votes to three.",
     "The council approved the dredging budget by seven votes to two.", "six|three"),
    ("Since the storm, the Harl ferry docks at the north quay.",
     "Since the storm, the Harl ferry docks at the south quay.", "north"),
    ("Edda Quimby chaired the meeting of the harbour board on Tuesday.",
     "Councillor Bram Okonedo chaired the meeting of the harbour board on Tuesday.", "Quimby"),
    ("Caldreth held 41 percent of the regional container trade this year, down from 58 percent "
     "a year earlier.", "Caldreth held 58 percent of the regional container trade this year.",
     "41 percent"),
    # the same answer, the opposite statement about it (SummEdits' antonym and negation edits)
    ("Vessel calls rose to 412 in the first quarter.",
     "Vessel calls fell to 412 in the first quarter.", "rose"),
    ("The harbour board approved the dredging budget on Tuesday.",
     "The harbour board did not approve the dredging budget on Tuesday.", "approved"),
    ("The harbour board approved a survey of the outer basin.",
     "The harbour board rejected a survey of the outer basin.", "approved"),
    # two names trading places in one sentence: each answer is in the source, at the other verb
    ("Edda Quimby chaired the meeting on Tuesday, and Bram Okonedo took the minutes.",
     "Bram Okonedo chaired the meeting on Tuesday, and Edda Quimby took the minutes.",
     "Edda Quimby chaired"),
]


@pytest.mark.parametrize("source,output,fix", CONTRADICTIONS,
                         ids=["time", "money", "scaled", "count", "votes", "direction", "name",
                              "two-years", "opposite-verb", "negated-verb", "report-verb",
                              "swapped-names"])
def test_changed_fact_is_contradicted_with_the_source_value_as_fix(checker, source, output, fix):
    r = checker.check(source, output)
    s = r.sentences[0]
    assert s.label == "contradicted", (s.reason, [(q.question, q.source_answer) for q in s.questions])
    assert r.label == "inconsistent"
    assert s.reason.rule in ("value", "opposite", "name", "negation")
    assert any(f in s.reason.suggestion for f in fix.split("|")) and "a rule" in s.reason.text


@pytest.mark.parametrize("source,output", [
    ("The new berth opened in April 2026.", "The new berth opened in April."),
    ("The survey closed on 2 June 2025.", "The survey closed in June 2025."),
    (MEETING, "The meeting closed at 21:20."),
    ("Repairs to the north quay cost 2.4 million crowns.",
     "Repairs to the north quay cost about 2.4 million crowns."),
    # the source has both verbs, or a negation on another verb: nothing is reversed
    ("Vessel calls rose in March but fell in April.", "Vessel calls fell in April."),
    ("The board, which had not met since March, approved the dredging budget.",
     "The board approved the dredging budget."),
    ("Edda Quimby chaired the meeting on Tuesday, and Bram Okonedo took the minutes.",
     "Quimby chaired the meeting, and Okonedo took the minutes."),
])
def test_same_fact_at_another_precision_or_in_another_form_is_supported(checker, source, output):
    r = checker.check(source, output)
    assert all(q.conflict is None for s in r.sentences for q in s.questions)
    assert r.sentences[0].label == "supported", r.sentences[0].reason
    assert r.label == "consistent"


def test_a_sentence_gets_the_same_label_wherever_it_stands(checker):
    """Its round trip reads it and its neighbours only, so its label cannot change with its
    place; its score may move a little with the neighbours' words."""
    source = ("The harbour board met on Tuesday. Edda Quimby chaired the meeting. The board "
              "approved a new pilot boat and a survey of the outer basin. Vessel calls rose to 412 "
              "in the first quarter.")
    probe = "Edda Quimby chaired the meeting."
    filler = ["The harbour board met on Tuesday.", "The board approved a new pilot boat.",
              "Vessel calls rose to 412 in the first quarter."]
    seen = []
    for pos in range(4):
        sents = filler[:pos] + [probe] + filler[pos:]
        r = checker.check(source, " ".join(sents))
        seen.append(next((s.label, s.score) for s in r.sentences if s.text == probe))
    assert {label for label, _ in seen} == {"supported"}, seen
    assert max(sc for _, sc in seen) - min(sc for _, sc in seen) < 0.01, seen


def test_bullets_and_line_breaks_are_sentences(checker):
    source = "Vessel calls rose to 412 in the first quarter. The north quay reopened in May."
    output = "Port summary\n- Vessel calls rose to 412\n* The north quay reopened in May"
    r = checker.check(source, output)
    assert [s.text for s in r.sentences] == ["Port summary", "Vessel calls rose to 412",
                                             "The north quay reopened in May"]
    assert [output[s.start:s.end] for s in r.sentences] == [s.text for s in r.sentences]


def test_a_heading_with_a_colon_states_nothing_and_is_not_judged(checker):
    """A lead-in line of a generated report ("Port summary:") used to score as an unsupported
    sentence and pull the pair score down; a line with a verb before its colon is a claim."""
    source = "Vessel calls rose to 412 in the first quarter. The north quay reopened in May."
    r = checker.check(source, "Port summary:\n- Vessel calls rose to 412\n"
                              "The north quay reopened in May:\n- after repairs")
    assert [s.text for s in r.sentences] == ["Vessel calls rose to 412",
                                             "The north quay reopened in May:", "after repairs"]


def test_pair_verdict_follows_from_its_sentences(checker):
    source = "Vessel calls rose to 412 in the first quarter. The north quay reopened in May."
    r = checker.check(source, "Vessel calls rose to 517 in the first quarter. "
                              "The north quay reopened in May.")
    assert r.score == min(s.score for s in r.sentences)
    assert (r.label == "inconsistent") == any(s.label in FLAGGED for s in r.sentences)
    assert r.sentences[0].label == "contradicted" and r.sentences[1].label == "supported"
