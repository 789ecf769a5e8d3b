"""The checker: wires segment -> spans -> questions -> answers -> answer matches -> verdicts.

Models load once, lazily, on first use.  ``check_many`` batches every stage
across all pairs it is given: one spaCy pass, one QG call, one QA call on the
outputs and one on the sources.  A question's round trip reads its sentence
and the sentences on either side, never the whole output, so a sentence's
verdict does not depend on what else the output says; its source answer
reads only the few source windows that can hold it (``qacheck.retrieval``),
so the cost of a question does not grow with the source.
"""
from __future__ import annotations

import json
import time
from collections import Counter
from collections.abc import Callable
from contextlib import contextmanager
from dataclasses import asdict, dataclass
from functools import cached_property
from importlib.metadata import version
from pathlib import Path

from qacheck.answer_match import match_answers, token_f1
from qacheck.cache import ResultCache, memoised
from qacheck.config import Thresholds, signature
from qacheck.drafting import keeps_to_sentence, rule_question
from qacheck.errors import InputError
from qacheck.judge import SentenceModel, judge, question_outcome
from qacheck.language import language_warnings
from qacheck.models.nli import NLIModel, Reading
from qacheck.models.qa import Answer, QAModel
from qacheck.models.qg import QGModel
from qacheck.results import ClaimResult, PairResult, QuestionResult, SentenceResult
from qacheck.retrieval import Passage, passage
from qacheck.segment import (SPACY_MODEL, Sentence, Span, entity_kinds_at, predicate_of,
                             segment_many)
from qacheck.words import novel_words


@dataclass
class _Candidate:
    pair: int
    sentence: int
    span: Span
    sentence_text: str
    offset: int  # sentence start in the output
    window: tuple[int, int]  # the sentence and its neighbours: what the round trip reads
    drafts: list[tuple[str, str]]  # (drafter, question), in the order tried


class Checker:
    """Checks outputs against sources; load once, then call ``check`` or ``check_many``.

    >>> checker = Checker()                                    # doctest: +SKIP
    >>> result = checker.check(source_text, output_text)       # doctest: +SKIP
    >>> result.label, result.score                             # doctest: +SKIP
    """

    def __init__(self, thresholds: Thresholds | None = None, qa: QAModel | None = None,
                 qg: QGModel | None | bool = None, model: SentenceModel | None = None,
                 nli: NLIModel | None | bool = None, store: ResultCache | None = None) -> None:
        self.thresholds = thresholds or Thresholds.shipped()
        self.model = model or SentenceModel.shipped()
        if nli is None:
            nli = NLIModel() if NLIModel.available() else False
        self.nli: NLIModel | None = nli or None
        self.qa = qa or QAModel()
        if qg is None:
            qg = QGModel() if QGModel.available() else False
        self.qg: QGModel | None = qg or None
        #: where answers and readings are kept per (question, context) and (evidence, claim)
        self.store = store
        #: called with each stage's name as it starts (the CLI's progress line)
        self.on_stage: Callable[[str], None] | None = None
        #: seconds spent in each stage since creation (read by the benchmark)
        self.stage_seconds: Counter[str] = Counter()
        for m in (self.qa, self.qg, self.nli):
            if m is not None:
                m.verify_files()

    @contextmanager
    def _stage(self, name: str):
        if self.on_stage is not None:
            self.on_stage(name)
        t0 = time.perf_counter()
        try:
            yield
        finally:
            self.stage_seconds[name] += time.perf_counter() - t0

    @cached_property
    def signature(self) -> dict:
        """Everything that can change a result (``qacheck.config.signature``)."""
        return self._signature(with_judge=True)

    @cached_property
    def evidence_signature(self) -> dict:
        """Everything that can change the questions and answers, but not the judging.

        Cached results are keyed by this, and judged again when read back, so
        a refitted sentence model reuses every answer already computed.
        """
        return self._signature(with_judge=False)

    def _signature(self, with_judge: bool) -> dict:
        """Library versions come from package metadata, so that a run whose every pair is
        cached never imports torch, transformers or spaCy."""
        from qacheck import retrieval
        from qacheck.opposites import wordnet_available

        digests = {"qa": self.qa.digest}
        if with_judge:
            digests["judge"] = self.model.digest
        runtime = {"qa": self.qa.settings,
                   "qa_source": {"window_words": retrieval.WINDOW_WORDS,
                                 "top_k": retrieval.QA_TOP_K},
                   "spacy_model": f"{SPACY_MODEL} {version(SPACY_MODEL.replace('_', '-'))}",
                   "precision": "bf16" if self.qa.bf16 else "fp32",
                   "torch": version("torch"), "transformers": version("transformers"),
                   "spacy": version("spacy"), "wordnet": "3.0" if wordnet_available() else "absent"}
        if self.qg is not None:
            digests["qg"] = self.qg.digest
            runtime["qg"] = self.qg.settings
        if self.nli is not None:
            digests["nli"] = self.nli.digest
            runtime["nli"] = {**self.nli.settings, "window_words": retrieval.WINDOW_WORDS,
                              "top_k": retrieval.TOP_K}
        return signature(digests, self.thresholds, runtime)

    def _answer(self, items: list[tuple[str, str]]) -> list[Answer]:
        """QA answers to (question, context) items, each computed once per model and settings."""
        scope = json.dumps(["qa", self.qa.digest, self.qa.settings, self.qa.bf16], sort_keys=True)
        return memoised(_in_slices(self.qa.answer), items, self.store, scope, asdict,
                        lambda d: Answer(**d))

    def _read(self, items: list[tuple[str, str]]) -> list[Reading]:
        """Entailment readings of (evidence, claim) items, each computed once per reader."""
        scope = json.dumps(["nli", self.nli.digest, self.nli.settings, self.nli.bf16],
                           sort_keys=True)
        return memoised(_in_slices(self.nli.read), items, self.store, scope, asdict,
                        lambda d: Reading(**d))

    def check(self, source: str, output: str) -> PairResult:
        """Check one (source, output) pair."""
        return self.check_many([(source, output)])[0]

    def check_many(self, pairs: list[tuple[str, str]]) -> list[PairResult]:
        """Check many pairs, batching each model stage across all of them."""
        for i, (src, out) in enumerate(pairs):
            for name, text in (("source", src), ("output", out)):
                if not isinstance(text, str) or not text.strip():
                    raise InputError("empty text", path=f"pair {i}", field=name)
        thr = self.thresholds
        with self._stage("segment"):
            segmented = segment_many([out for _, out in pairs], thr.max_spans_per_sentence)
        kept = self._questions(segmented, pairs)
        with self._stage("retrieve"):
            passages = [passage(pairs[c.pair][0], q) for c, _, q, _ in kept]
        with self._stage("qa_source"):
            read = self._answer([(q, ps.text) for (_, _, q, _), ps in zip(kept, passages)])
        src_answers = [_in_source(a, ps, pairs[c.pair][0])
                       for a, ps, (c, _, _, _) in zip(read, passages, kept)]
        sig = self.signature
        by_pair = [[SentenceResult(s.text, s.start, s.end, None, "unverifiable",
                                   spans_considered=len(s.spans),
                                   novel_words=(found := novel_words(s.text, src))[0],
                                   content_words=found[1]) for s in sents]
                   for sents, (src, _) in zip(segmented, pairs)]
        for (cand, drafter, question, out_ans), src_ans in zip(kept, src_answers):
            answered = src_ans.no_answer_prob <= thr.no_answer and src_ans.has_answer
            src = pairs[cand.pair][0]
            m = match_answers(
                out_ans.text, src_ans.text, cand.span.kind,
                lambda src=src, a=src_ans: entity_kinds_at(src, a.start, a.end),
                lambda src=src, a=src_ans, c=cand: (
                    predicate_of(c.sentence_text, c.span.start, c.span.end),
                    predicate_of(src, a.start, a.end)))
            outcome, score = question_outcome(m.agreement, m.conflict, src_ans.no_answer_prob, thr)
            by_pair[cand.pair][cand.sentence].questions.append(QuestionResult(
                question=question, drafter=drafter, span=cand.span.text, span_kind=cand.span.kind,
                output_answer=out_ans.text,
                source_answer=src_ans.text if answered else None,
                source_start=src_ans.start if answered else None,
                source_end=src_ans.end if answered else None,
                no_answer_prob=round(src_ans.no_answer_prob, 4), f1=round(m.f1, 4),
                match_kind=m.kind, same=m.same, conflict=m.conflict if answered else None,
                conflict_detail=m.detail if answered else "", outcome=outcome,
                score=round(score, 4),
                novel_span=bool(novel_words(cand.span.text, pairs[cand.pair][0])[0])))
        if self.nli is not None:
            with self._stage("claims"):
                self._read_claims(segmented, pairs, by_pair)
        with self._stage("judge"):
            return [judge(PairResult(None, "unscored", by_pair[p], sig, {}, src, out,
                                     warnings=language_warnings(src, out)), self.model, thr)
                    for p, (src, out) in enumerate(pairs)]

    def _read_claims(self, segmented: list[list[Sentence]], pairs: list[tuple[str, str]],
                     by_pair: list[list[SentenceResult]]) -> None:
        """Read each sentence as a claim against its best source windows; keep the window that
        supports it best (highest P(entailed)) as its evidence."""
        from qacheck.retrieval import best_windows

        items = [(p, si, w) for p, sents in enumerate(segmented) for si, s in enumerate(sents)
                 for w in best_windows(pairs[p][0], s.text)]
        readings = self._read([(w.text, segmented[p][si].text) for p, si, w in items])
        best: dict[tuple[int, int], tuple] = {}
        for (p, si, w), r in zip(items, readings):
            if (p, si) not in best or r.entailed > best[p, si][1].entailed:
                best[p, si] = (w, r)
        for (p, si), (w, r) in best.items():
            by_pair[p][si].claim = ClaimResult(w.start, w.end, round(r.entailed, 4),
                                               round(r.contradicted, 4), round(r.not_supported, 4))

    def _questions(self, segmented: list[list[Sentence]], pairs: list[tuple[str, str]]):
        """Per span, the first draft that survives the round trip, with its answer on the output.

        The rule draft goes first: kept in situ, it holds every other word of
        the sentence, which is what lets the QA model find the same fact in the
        source.  A seq2seq question is a paraphrase and may bring words the
        sentence never had, which the source then "cannot answer"; so it is
        drafted only for spans whose rule draft failed (which also spares most
        of the beam search), and used only when it keeps to its sentence.
        """
        with self._stage("draft_rules"):
            cands = [_Candidate(p, si, span, s.text, s.start, _neighbourhood(sents, si),
                                [("rules", rule_question(s.text, span))])
                     for p, sents in enumerate(segmented) for si, s in enumerate(sents)
                     for span in s.spans]
        with self._stage("qa_output"):
            kept, failed = self._round_trip(cands, pairs)
        if self.qg is not None and failed:
            with self._stage("draft_seq2seq"):
                generated = self.qg.generate([(c.sentence_text, c.span.start, c.span.end)
                                              for c in failed])
            retry = []
            for c, q in zip(failed, generated):
                if q and c.span.text.lower() not in q.lower() and keeps_to_sentence(q, c.sentence_text):
                    c.drafts.append(("seq2seq", q))
                    retry.append(c)
            with self._stage("qa_output"):
                kept += self._round_trip(retry, pairs)[0]
        # in span order, so results do not depend on which round kept a question
        order = {id(c): i for i, c in enumerate(cands)}
        return sorted(kept, key=lambda k: order[id(k[0])])

    def _round_trip(self, cands: list[_Candidate], pairs: list[tuple[str, str]]):
        """Ask each candidate's latest draft of its sentence neighbourhood: (kept, failed).

        A draft is kept when the QA model, reading the sentence and its
        neighbours, answers it with the span itself (overlapping it, token F1
        at least ``round_trip_f1``).
        """
        answers = self._answer([(c.drafts[-1][1], pairs[c.pair][1][c.window[0]:c.window[1]])
                                  for c in cands])
        kept, failed = [], []
        for c, a in zip(cands, answers):
            at = c.offset - c.window[0]  # the sentence's start inside its neighbourhood
            span_abs = (at + c.span.start, at + c.span.end)
            overlaps = a.start < span_abs[1] and span_abs[0] < a.end
            if (a.has_answer and a.no_answer_prob <= self.thresholds.no_answer and overlaps
                    and token_f1(a.text, c.span.text) >= self.thresholds.round_trip_f1):
                kept.append((c, *c.drafts[-1], a))
            else:
                failed.append(c)
        return kept, failed


#: items per model call: a long output's questions are tokenised and read a slice at a time,
#: so memory stays bounded whatever the output's length (answers do not depend on the batch)
SLICE = 256


def _in_slices(call: Callable[[list], list]) -> Callable[[list], list]:
    """``call`` over ``SLICE`` items at a time, results in order."""
    return lambda items: [r for i in range(0, len(items), SLICE) for r in call(items[i:i + SLICE])]


def _in_source(answer: Answer, read: Passage, source: str) -> Answer:
    """An answer found in a passage, with its offsets and text in the source."""
    if not answer.has_answer:
        return answer
    start, end = read.to_source(answer.start), read.to_source(answer.end)
    return Answer(source[start:end], start, end, answer.score, answer.no_answer_prob)


def _neighbourhood(sents: list[Sentence], i: int) -> tuple[int, int]:
    """Character range of sentence ``i`` with one sentence on either side."""
    return sents[max(0, i - 1)].start, sents[min(len(sents) - 1, i + 1)].end


def read_text(path: str | Path, field: str) -> str:
    """Read a UTF-8 text file ('-' for stdin), with a clear error for bad input."""
    import sys

    try:
        if str(path) == "-":
            data = sys.stdin.buffer.read()
        else:
            data = Path(path).read_bytes()
    except OSError as exc:
        raise InputError(f"cannot read: {exc.strerror}", path=path, field=field) from exc
    try:
        text = data.decode("utf-8")
    except UnicodeDecodeError as exc:
        line = data[: exc.start].count(b"\n") + 1
        raise InputError(f"not UTF-8 (byte {exc.start})", path=path, line=line, field=field) from exc
    if "\x00" in text:
        line = text[: text.index("\x00")].count("\n") + 1
        raise InputError("contains NUL bytes (a binary file?)", path=path, line=line, field=field)
    if not text.strip():
        raise InputError("empty text", path=path, field=field)
    return text
