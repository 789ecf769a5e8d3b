"""The checker: wires segment -> spans -> questions -> answers -> comparisons -> verdicts.

Models load once, lazily, on first use.  ``check_many`` batches every stage
across all pairs it is given: one spaCy pass, one QG call, one QA call on the
outputs and one on the sources.
"""
from __future__ import annotations

import time
from collections import Counter
from contextlib import contextmanager
from dataclasses import dataclass
from pathlib import Path

from qacheck.compare import compare_answers, token_f1
from qacheck.config import Thresholds, signature
from qacheck.drafting import keeps_to_sentence, rule_question
from qacheck.errors import InputError
from qacheck.models.qa import QAModel
from qacheck.models.qg import QGModel
from qacheck.pairmodel import PairModel
from qacheck.results import PairResult, QuestionResult, SentenceResult
from qacheck.segment import Sentence, Span, segment_many
from qacheck.verdict import judge, question_outcome


@dataclass
class _Candidate:
    pair: int
    sentence: int
    span: Span
    sentence_text: str
    offset: int  # sentence start in the output
    drafts: list[tuple[str, str]]  # (drafter, question), in the order tried


class Checker:
    """Checks outputs against sources; load once, then call ``check`` or ``check_many``.

    >>> checker = Checker()                                    # doctest: +SKIP
    >>> result = checker.check(source_text, output_text)       # doctest: +SKIP
    >>> result.label, result.score                             # doctest: +SKIP
    """

    def __init__(self, thresholds: Thresholds | None = None, qa: QAModel | None = None,
                 qg: QGModel | None | bool = None, pair_model: PairModel | None = None) -> None:
        self.thresholds = thresholds or Thresholds.shipped()
        self.pair_model = pair_model or PairModel.shipped()
        self.qa = qa or QAModel()
        if qg is None:
            qg = QGModel() if QGModel.available() else False
        self.qg: QGModel | None = qg or None
        #: seconds spent in each stage since creation (read by the benchmark)
        self.stage_seconds: Counter[str] = Counter()

    @contextmanager
    def _stage(self, name: str):
        t0 = time.perf_counter()
        try:
            yield
        finally:
            self.stage_seconds[name] += time.perf_counter() - t0

    @property
    def signature(self) -> dict:
        digests = {"qa": self.qa.digest, "pair": self.pair_model.digest}
        if self.qg is not None:
            digests["qg"] = self.qg.digest
        return signature(digests, self.thresholds)

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
        with self._stage("qa_source"):
            src_answers = self.qa.answer([(q, pairs[c.pair][0]) for c, _, q, _ in kept])
        sig = self.signature
        results = []
        by_pair: dict[int, list[SentenceResult]] = {}
        for p, sents in enumerate(segmented):
            by_pair[p] = [SentenceResult(s.text, s.start, s.end, None, "unchecked",
                                         spans_considered=len(s.spans)) for s in sents]
        for (cand, drafter, question, out_ans), src_ans in zip(kept, src_answers):
            has = src_ans.no_answer_prob <= thr.no_answer and src_ans.has_answer
            agreement = compare_answers(out_ans.text, src_ans.text)
            outcome, score = question_outcome(agreement, src_ans.no_answer_prob, thr)
            by_pair[cand.pair][cand.sentence].questions.append(QuestionResult(
                question=question, drafter=drafter, span=cand.span.text, span_kind=cand.span.kind,
                output_answer=out_ans.text,
                source_answer=src_ans.text if has else None,
                source_start=src_ans.start if has else None,
                source_end=src_ans.end if has else None,
                no_answer_prob=round(src_ans.no_answer_prob, 4), f1=round(agreement.f1, 4),
                value_kind=agreement.kind, same_value=agreement.same_value,
                outcome=outcome, score=round(score, 4)))
        for p, (src, out) in enumerate(pairs):
            results.append(judge(PairResult(None, "unscored", by_pair[p], sig, {}, src, out),
                                 thr, self.pair_model))
        return results

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
            cands = [_Candidate(p, si, span, s.text, s.start, [("rules", rule_question(s.text, span))])
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
        """Ask each candidate's latest draft of its output: (kept, failed).

        A draft is kept when the QA model, reading the output, answers it with
        the span itself (overlapping it, token F1 at least ``round_trip_f1``).
        """
        answers = self.qa.answer([(c.drafts[-1][1], pairs[c.pair][1]) for c in cands])
        kept, failed = [], []
        for c, a in zip(cands, answers):
            span_abs = (c.offset + c.span.start, c.offset + c.span.end)
            overlaps = a.start < span_abs[1] and span_abs[0] < a.end
            if (a.has_answer and a.no_answer_prob <= self.thresholds.no_answer and overlaps
                    and token_f1(a.text, c.span.text) >= self.thresholds.round_trip_f1):
                kept.append((c, *c.drafts[-1], a))
            else:
                failed.append(c)
        return kept, failed


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
    if not text.strip():
        raise InputError("empty text", path=path, field=field)
    return text
