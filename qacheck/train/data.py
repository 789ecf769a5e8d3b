"""Reading QA records and building constructed unanswerable examples.

SQuAD v1.1 has no unanswerable questions, yet qacheck needs a model that says
"the source does not say" -- that is how unverifiable (extrinsic) content is
told apart from contradictions.  We construct negatives from the data itself:

* ``drop_sentence``: the sentence holding the answer is removed from the
  context, leaving an on-topic passage that lacks the fact;
* ``other_paragraph``: the question is paired with another paragraph of the
  same article, which is topical but (checked) does not contain the answer.

It also adds questions in the form qacheck itself asks (``in_situ``): the
answer sentence with its answer replaced by a wh-phrase, as the rule-based
drafter writes it.  SQuAD's crowd questions rarely look like that, and a model
that never saw one answers them less well and returns longer spans than asked.
Half of them are asked against the answer sentence alone (``in_situ_sentence``),
the context of the round trip on an output sentence.  They pass through the
negative construction like any other question, so an in-situ question also
learns to get no answer when its fact is missing.

Titles are split deterministically into train and held-out groups so that the
held-out negatives used for the no-answer ROC AUC share no article with
training data.
"""
from __future__ import annotations

import gzip
import hashlib
import json
import random
from collections import defaultdict
from collections.abc import Iterator
from dataclasses import dataclass
from pathlib import Path

from qacheck.errors import InputError
from qacheck.jsonl import iter_records
from qacheck.segment import sentence_bounds as split_sentences



@dataclass(frozen=True)
class QAExample:
    """One (question, context) pair; ``answers`` is empty when unanswerable."""

    qid: str
    title: str
    question: str
    context: str
    answers: tuple[str, ...]
    answer_starts: tuple[int, ...]
    #: original | drop_sentence | other_paragraph | squad2_impossible | in_situ | in_situ_sentence
    kind: str = "original"

    @property
    def is_impossible(self) -> bool:
        return not self.answers


def _open_text(path: Path):
    if path.suffix == ".gz":
        return gzip.open(path, "rt", encoding="utf-8")
    return open(path, encoding="utf-8")


def _from_jsonl(path: Path) -> Iterator[QAExample]:
    for lineno, rec in iter_records(path, ("question", "context", "answers")):
        ans = rec["answers"] or {}
        yield QAExample(
            qid=str(rec.get("id", f"{path.name}:{lineno}")),
            title=str(rec.get("title", "")),
            question=rec["question"],
            context=rec["context"],
            answers=tuple(ans.get("text", [])),
            answer_starts=tuple(ans.get("answer_start", [])),
            kind="original" if ans.get("text") else "squad2_impossible",
        )


def _from_squad_json(path: Path) -> Iterator[QAExample]:
    """The official SQuAD layout: ``data[].paragraphs[].qas[]`` (v1.1 and v2.0)."""
    try:
        with _open_text(path) as fh:
            doc = json.load(fh)
    except json.JSONDecodeError as exc:
        raise InputError(f"not valid JSON: {exc.msg}", path=path, line=exc.lineno) from exc
    if "data" not in doc:
        raise InputError("missing field", path=path, field="data")
    for article in doc["data"]:
        for para in article.get("paragraphs", []):
            for qa in para.get("qas", []):
                impossible = bool(qa.get("is_impossible", False))
                answers = [] if impossible else qa.get("answers", [])
                yield QAExample(
                    qid=str(qa["id"]),
                    title=str(article.get("title", "")),
                    question=qa["question"],
                    context=para["context"],
                    answers=tuple(a["text"] for a in answers),
                    answer_starts=tuple(int(a.get("answer_start", -1)) for a in answers),
                    kind="squad2_impossible" if impossible else "original",
                )


def read_qa_file(path: str | Path) -> list[QAExample]:
    """Read SQuAD JSON (v1.1/v2.0) or the JSONL records of ``shared/data/qa``."""
    p = Path(path)
    if not p.exists():
        raise InputError("file not found", path=p)
    name = p.name.removesuffix(".gz")
    if name.endswith(".jsonl"):
        return list(_from_jsonl(p))
    return list(_from_squad_json(p))


def answer_sentence(ex: QAExample) -> tuple[int, int] | None:
    """Character span of the sentence (``split_sentences``) holding the first answer, if one does."""
    a0 = ex.answer_starts[0]
    a1 = a0 + len(ex.answers[0])
    return next(((s, e) for s, e in split_sentences(ex.context) if s <= a0 and a1 <= e), None)


def _contains_any(text: str, answers: tuple[str, ...]) -> bool:
    low = text.lower()
    return any(a.lower() in low for a in answers)


def drop_answer_sentence(ex: QAExample) -> QAExample | None:
    """The context without the sentence(s) holding the answer, or None if not possible."""
    if not ex.answers or ex.answer_starts[0] < 0:
        return None
    a_start = ex.answer_starts[0]
    a_end = a_start + len(ex.answers[0])
    sents = split_sentences(ex.context)
    if len(sents) < 2:
        return None
    kept = [ex.context[s:e] for s, e in sents if e <= a_start or s >= a_end]
    if not kept:
        return None
    context = " ".join(kept)
    if _contains_any(context, ex.answers):
        return None
    return QAExample(ex.qid + "-dropsent", ex.title, ex.question, context, (), (), "drop_sentence")


def is_heldout_title(title: str, share: float) -> bool:
    """Deterministic title split (hash based) so held-out articles never reach training."""
    h = int(hashlib.sha256(title.encode("utf-8")).hexdigest()[:8], 16)
    return (h % 10_000) < share * 10_000


def with_negatives(
    examples: list[QAExample], negative_share: float, seed: int
) -> list[QAExample]:
    """Add constructed unanswerable examples so they make up ``negative_share`` of the result.

    Half come from dropping the answer sentence, half from another paragraph of
    the same article (falling back to whichever kind is available).
    """
    rng = random.Random(seed)
    n_neg = int(round(len(examples) * negative_share / (1.0 - negative_share)))
    by_title: dict[str, list[str]] = defaultdict(list)
    for ex in examples:
        if ex.title and (not by_title[ex.title] or by_title[ex.title][-1] != ex.context):
            by_title[ex.title].append(ex.context)
    order = list(range(len(examples)))
    rng.shuffle(order)
    negatives: list[QAExample] = []
    for i, idx in enumerate(order):
        if len(negatives) >= n_neg:
            break
        ex = examples[idx]
        if ex.is_impossible:
            continue
        neg = drop_answer_sentence(ex) if i % 2 == 0 else None
        if neg is None:
            others = [c for c in by_title.get(ex.title, []) if c != ex.context]
            rng.shuffle(others)
            for ctx in others[:5]:
                if not _contains_any(ctx, ex.answers):
                    neg = QAExample(ex.qid + "-otherpara", ex.title, ex.question, ctx, (), (),
                                    "other_paragraph")
                    break
        if neg is None:
            neg = drop_answer_sentence(ex)
        if neg is not None:
            negatives.append(neg)
    out = examples + negatives
    rng.shuffle(out)
    return out


def in_situ_variants(examples: list[QAExample], share: float, seed: int) -> list[QAExample]:
    """In-situ questions for ``share`` of the answerable examples (see the module docstring).

    The answer must lie inside one sentence (regex split); the draft must not
    contain the answer verbatim.  spaCy parses only the answer sentences.
    """
    from qacheck.drafting import rule_question, span_at
    from qacheck.segment import nlp

    rng = random.Random(seed)
    picked = [e for e in examples if not e.is_impossible and e.answer_starts[0] >= 0]
    picked = rng.sample(picked, int(len(picked) * share)) if share < 1 else picked
    located = []
    for ex in picked:
        sentence = answer_sentence(ex)
        if sentence is not None:
            s, t = sentence
            a0 = ex.answer_starts[0]
            located.append((ex, s, t, a0 - s, a0 + len(ex.answers[0]) - s))
    out: list[QAExample] = []
    docs = nlp().pipe([ex.context[s:t] for ex, s, t, _, _ in located], batch_size=256)
    for i, (doc, (ex, s, t, a, b)) in enumerate(zip(docs, located)):
        question = rule_question(doc.text, span_at(doc, a, b))
        if ex.answers[0].lower() in question.lower():
            continue
        if i % 2:
            out.append(QAExample(ex.qid + "-insitu-sent", ex.title, question, ex.context[s:t],
                                 ex.answers[:1], (a,), "in_situ_sentence"))
        else:
            out.append(QAExample(ex.qid + "-insitu", ex.title, question, ex.context,
                                 ex.answers[:1], ex.answer_starts[:1], "in_situ"))
    return out


def heldout(path: str | Path, seed: int, negative_share: float = 1 / 3,
            heldout_share: float = 0.02) -> list[QAExample]:
    """Only the held-out examples of ``train_and_heldout`` (for evaluation)."""
    records = [r for r in read_qa_file(path) if is_heldout_title(r.title, heldout_share)]
    return with_negatives(records, negative_share, seed + 1)


def train_and_heldout(
    path: str | Path, seed: int, negative_share: float = 1 / 3, heldout_share: float = 0.02,
    in_situ_share: float = 0.0,
) -> tuple[list[QAExample], list[QAExample]]:
    """The training examples and the held-out examples (both with constructed negatives).

    ``in_situ_share`` adds in-situ questions to the training side only, so the
    held-out figures stay comparable across runs.
    """
    records = read_qa_file(path)
    train = [r for r in records if not is_heldout_title(r.title, heldout_share)]
    held = [r for r in records if is_heldout_title(r.title, heldout_share)]
    if in_situ_share > 0:
        train = train + in_situ_variants(train, in_situ_share, seed)
    return with_negatives(train, negative_share, seed), with_negatives(held, negative_share, seed + 1)
