"""Answer matching: does the source's answer to a question say what the output's answer says?

Token F1 follows the official SQuAD v1.1 evaluation script (Rajpurkar et al.
2016): lower-case, remove punctuation, drop the articles a/an/the, collapse
white space.  Token F1 alone calls "1,200" and "twelve hundred" different and
"80,000 crowns" and "8,000 crowns" half the same, so an answer match also
looks at what the words mean:

* values anywhere in the answers, compared value by value (``qacheck.values``);
* opposite words and a negation on one side only (``qacheck.opposites``);
* two different names given as the answer to a question about a name.

A match of the last three kinds is a typed *conflict*: specific evidence that
the output says something else than the source, which no fitted score may
overrule (``qacheck.judge``).
"""
from __future__ import annotations

import re
import string
from collections import Counter
from collections.abc import Callable
from dataclasses import dataclass, replace

from typing import Literal

from rapidfuzz import fuzz

from qacheck.opposites import antonyms, one_sided_negation, opposite_pair
from qacheck.segment import Predicate
from qacheck.values import compare_values, extract_values

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


# --- matching ------------------------------------------------------------------------

#: how two answers were compared
#: ("predicate": the answers agree, and the verbs they are arguments of were compared)
MatchKind = Literal["text", "amount", "time", "date", "name", "predicate"]
#: the typed conflicts: specific evidence of a contradiction
Conflict = Literal["value", "opposite", "negation", "name"]

#: spaCy entity kinds whose answer is a name: a different name is a different thing
NAME_KINDS = frozenset({"PERSON", "ORG", "GPE", "LOC", "FAC", "NORP", "PRODUCT", "EVENT",
                        "WORK_OF_ART", "LAW"})


@dataclass(frozen=True)
class AnswerMatch:
    """How the output's answer and the source's answer to one question relate.

    ``f1`` is SQuAD token F1; ``same`` says the two name the same text or
    value; ``conflict`` names a typed contradiction (None when there is none)
    and ``detail`` says what conflicts ("north vs south").
    """

    f1: float
    same: bool
    kind: MatchKind
    conflict: Conflict | None = None
    detail: str = ""

    @property
    def agreement(self) -> float:
        """1 for the same text or value, 0 for a typed conflict, token F1 otherwise."""
        if self.conflict is not None:
            return 0.0
        return 1.0 if self.same else self.f1


def _looks_like_name(text: str) -> bool:
    """Every content word capitalised ("Edda Quimby", "Port of Caldreth Authority")."""
    words = [w for w in re.findall(r"[^\W\d_][\w'.-]*", text) if w.lower() not in _NAME_GLUE]
    return bool(words) and all(w[0].isupper() for w in words)


_NAME_GLUE = frozenset({"of", "the", "and", "for", "de", "van", "von", "der", "la", "le", "du", "da"})


_SPACED_HYPHEN = re.compile(r"(?<=\w) +- +(?=\w)")


def join_hyphens(text: str) -> str:
    """"hat - trick" -> "hat-trick": tokenised generator output spaces the hyphens of compounds,
    and the SQuAD normalisation, which deletes punctuation, would then read "hat trick" against
    the source's "hattrick".  A dash between clauses ("2018 - but") is joined too; inside a
    short answer that costs nothing."""
    return _SPACED_HYPHEN.sub("-", text)


def match_answers(output_answer: str, source_answer: str, span_kind: str = "",
                  source_kinds: Callable[[], frozenset[str]] | None = None,
                  predicates: Callable[[], tuple[Predicate | None, Predicate | None]] | None = None,
                  ) -> AnswerMatch:
    """Compare the output's answer with the source's answer to the same question.

    ``source_kinds`` gives spaCy's entity labels of the source answer where it
    stands in the source (asked only before a name conflict is called).
    ``predicates`` gives the verbs the two answers are arguments of; asked only
    when the answers agree, it turns agreement into a conflict when the two
    texts say opposite things about the same answer (``predicate_conflict``).
    Hyphens are compared unspaced (``join_hyphens``).  In order: identical
    text; a value conflict; a one-sided negation; an opposite word; the same
    value; for a name question, one name written two ways or one person named
    twice (``_same_name``) agrees, and two different names conflict (neither
    holds the other: "Quimby" and "Edda Quimby" name one person, "Bram Okonedo"
    and "Edda Quimby" two); one answer holding the other (rapidfuzz's
    token-set ratio is 100, "the authority" / "Port of Caldreth Authority");
    otherwise token F1 decides.
    """
    m = _match(output_answer, source_answer, span_kind, source_kinds)
    if m.conflict is None and (m.same or m.f1 >= PREDICATE_CHECK_F1) and predicates is not None:
        found = predicate_conflict(*predicates(), join_hyphens(output_answer), span_kind)
        if found is not None:
            return replace(m, same=False, kind="predicate", conflict=found[0], detail=found[1])
    return m


#: answers at least this alike (token F1) are the same answer, so their predicates are compared
PREDICATE_CHECK_F1 = 0.5


def predicate_conflict(out: Predicate | None, src: Predicate | None, output_answer: str = "",
                       span_kind: str = "") -> tuple[Conflict, str] | None:
    """The output and the source say different things about one answer.

    * the same verb negated on one side only ("did not approve" / "approved");
    * verbs that are WordNet antonyms ("fell" / "rose");
    * for a name: the source's sentence gives the output's verb, in the answer's role, to
      another name ("Bram Okonedo chaired ... and Edda Quimby took the minutes" against "Edda
      Quimby chaired ... and Bram Okonedo took the minutes": the QA model finds Bram Okonedo in
      the source, at "took").

    The first two not when the source's sentence also has the output's verb with the output's
    polarity ("rose in May but fell in June"): the QA model may have located the answer at the
    other verb."""
    if out is None or src is None:
        return None
    if (span_kind in NAME_KINDS and out.role in ("nsubj", "nsubjpass", "dobj")
            and out.lemma not in _LIGHT_VERBS):
        others = [a for lemma, role, a in src.arguments if lemma == out.lemma and role == out.role]
        if others and all(_looks_like_name(a) and not _same_name(a, output_answer, span_kind)
                           and fuzz.token_set_ratio(normalize_answer(a),
                                                    normalize_answer(output_answer)) < 100
                           for a in others):
            return "name", f"{output_answer} {out.text} vs {others[0]} {out.text}"
    if (out.lemma, out.negated) in src.in_sentence:
        return None
    if out.lemma == src.lemma and out.negated != src.negated:
        return "negation", f"{out.text} vs {src.text}"
    if (out.lemma != src.lemma and out.negated == src.negated
            and not {out.lemma, src.lemma} & _LIGHT_VERBS
            and (src.lemma in antonyms(out.lemma) or out.lemma in antonyms(src.lemma))):
        return "opposite", f"{out.text} vs {src.text}"
    return None


#: verbs whose meaning is in their object: "gave Sociedad the lead" and "took the lead" say one
#: thing, though WordNet lists give/take, come/go and bring/take as antonyms
_LIGHT_VERBS = frozenset({"give", "take", "get", "make", "have", "do", "go", "come", "put", "set",
                          "bring", "keep", "let", "be"})


def _match(output_answer: str, source_answer: str, span_kind: str,
           source_kinds: Callable[[], frozenset[str]] | None) -> AnswerMatch:
    """The answers alone compared (``match_answers`` without the predicates)."""
    output_answer, source_answer = join_hyphens(output_answer), join_hyphens(source_answer)
    f1 = token_f1(output_answer, source_answer)
    na, nb = normalize_answer(output_answer), normalize_answer(source_answer)
    if na == nb:
        return AnswerMatch(1.0, True, "text")
    verdict, family = compare_values(extract_values(output_answer), extract_values(source_answer))
    if verdict == "conflict":
        return AnswerMatch(f1, False, family, "value", f"{output_answer} vs {source_answer}")
    if one_sided_negation(output_answer, source_answer):
        return AnswerMatch(f1, False, family or "text", "negation",
                           f"{output_answer} vs {source_answer}")
    opposite = opposite_pair(output_answer, source_answer)
    if opposite is not None:
        return AnswerMatch(f1, False, family or "text", "opposite", " vs ".join(opposite))
    if verdict == "same":
        return AnswerMatch(f1, True, family)
    held = bool(na and nb) and fuzz.token_set_ratio(na, nb) == 100
    if (span_kind in NAME_KINDS and not held and _looks_like_name(output_answer)
            and _looks_like_name(source_answer)):
        if _same_name(output_answer, source_answer, span_kind):
            return AnswerMatch(f1, True, "name")
        if _name_kinds_agree(span_kind, source_answer, source_kinds):
            return AnswerMatch(f1, False, "name", "name", f"{output_answer} vs {source_answer}")
    return AnswerMatch(f1, held, "text")


def _same_name(a: str, b: str, span_kind: str = "") -> bool:
    """One name spelt two ways ("Paris Saint - Germain" / "Paris Saint-Germain", a typo), or, for
    a person, two mentions that share a name ("Alexander Kristoff" / "Norway's Kristoff",
    "Mrs Ru" / "Driver Mei Ru").

    Sharing a word is taken as one person only for people: news text names a person by
    surname once introduced, while "Manchester United" and "Manchester City" are two teams.
    The price: "Jon Vell" and "Ada Vell" also count as one person.
    """
    squash = lambda t: re.sub(r"[\W_]+", "", t.lower())  # noqa: E731
    if squash(a) == squash(b) or fuzz.ratio(squash(a), squash(b)) >= 90:
        return True
    if span_kind != "PERSON":
        return False

    def names(t: str) -> set[str]:
        """Its name words: capitalised ones, or every word of an all-lower-case text."""
        return {w.lower().removesuffix("'s") for w in re.findall(r"[^\W\d_][\w'-]*", t)
                if (w[0].isupper() or t.islower()) and w.lower().rstrip(".") not in _TITLES
                and w.lower() not in _NAME_GLUE}

    return bool(names(a) & names(b))


#: words before a name that are not part of it
_TITLES = frozenset({"mr", "mrs", "ms", "miss", "mx", "dr", "sir", "dame", "lord", "lady", "prof",
                     "professor", "rev", "st", "saint", "president", "prime", "minister",
                     "king", "queen", "prince", "princess", "judge", "justice", "general",
                     "captain", "coach", "manager", "driver", "officer", "councillor", "mayor",
                     "senator", "governor", "chief", "the", "former", "new"})


def _name_kinds_agree(span_kind: str, answer: str,
                      source_kinds: Callable[[], frozenset[str]] | None = None) -> bool:
    """The source's answer names the same kind of thing (a person for a person), as spaCy sees it.

    A team asked about and a player given back is the QA model answering
    another question, not the source naming another team.  The answer is
    typed where it stands in the source when the caller can say
    (``source_kinds``), else alone; an answer spaCy cannot type is given the
    benefit of the doubt.
    """
    from qacheck.segment import nlp

    kinds = source_kinds() if source_kinds is not None else frozenset()
    if not kinds:
        kinds = frozenset(e.label_ for e in nlp()(answer).ents)
    if not kinds:
        return True
    people = {"PERSON"}
    places_and_bodies = {"ORG", "GPE", "LOC", "FAC", "NORP"}
    for group in (people, places_and_bodies):
        if span_kind in group:
            return bool(kinds & group)
    return span_kind in kinds
