"""Train the claim-vs-evidence (entailment) reader from all-MiniLM-L6-v2.

A cross-encoder reads (evidence, claim) and gives three probabilities:
entailed, contradicted, not supported.  Its training data mixes

* published entailment sets from ``../shared/data/nli/`` whose licence lets
  derived weights ship (the non-commercial files are for evaluation only),
  each capped so that no templated or skewed set dominates; two-way files
  (``not_entailment``) train only P(entailed), through a loss on
  P(contradicted) + P(not supported);
* pairs built from the QA training paragraphs in the spirit of the
  synthetic transformations for factual consistency (Kryscinski et al.
  2020): a sentence of the paragraph is an entailed claim, the same sentence
  with a swapped name, number, negation, antonym or reversed comparison a
  contradicted one, and a
  sentence from another paragraph of the same article an unsupported one,
  each read against the paragraph as evidence.

Data is loaded, mixed and split with ``datasets``; pairs are held out by
premise so that no evidence text is seen in training and in evaluation.
"""
from __future__ import annotations

import hashlib
import random
import re
import time
from dataclasses import dataclass
from pathlib import Path
from typing import Any

import torch

from qacheck.segment import sentence_bounds
from qacheck.train.loop import LoopConfig, export_model, pad_rows, train_loop

LABELS = ("entailed", "contradicted", "not_supported")
#: a two-way "not_entailment" label: contradicted or not supported, the set does not say which
NOT_ENTAILED = 3
_LABEL_OF = {"entailment": 0, "contradiction": 1, "neutral": 2, "not_entailment": NOT_ENTAILED}
MAX_LEN = 256

#: files whose licence forbids commercial use: evaluation only, never trained on
NON_COMMERCIAL = frozenset({"anli_dev", "control", "sick", "imppres"})
#: at most this many training pairs from one file, so no single set dominates
PER_FILE_CAP = 12_000
#: tighter caps for templated or one-sided sets (README of the data: breaking_nli is mostly
#: contradictions, monli/med/help have none)
SKEWED_CAP = {"breaking_nli": 3_000, "monli": 1_500, "med": 2_000, "help": 2_000}


@dataclass(frozen=True)
class NLIPair:
    premise: str
    hypothesis: str
    label: int  # index into LABELS, or NOT_ENTAILED
    source: str


def heldout_premise(premise: str, share: float = 0.05) -> bool:
    """A fixed share of premises, chosen by hash, never trained on."""
    h = int(hashlib.sha256(premise.encode("utf-8")).hexdigest()[:8], 16)
    return h / 0xFFFFFFFF < share


def read_nli_file(path: Path) -> list[NLIPair]:
    """One gzipped JSON Lines file of ``../shared/data/nli/`` (read by ``datasets``)."""
    from datasets import load_dataset

    ds = load_dataset("json", data_files=str(path), split="train")
    name = path.name.split(".")[0]
    return [NLIPair(r["premise"], r["hypothesis"], _LABEL_OF[r["label"]], name)
            for r in ds if r["label"] in _LABEL_OF and r["premise"] and r["hypothesis"]]


def published_pairs(nli_dir: Path, seed: int, cap: int = PER_FILE_CAP
                    ) -> tuple[list[NLIPair], list[NLIPair], list[str]]:
    """Train and held-out pairs from every file that may be trained on (at most ``cap`` a
    file, less for skewed ones), and the files used."""
    rng = random.Random(seed)
    train, held, used = [], [], []
    for path in sorted(nli_dir.glob("*.jsonl.gz")):
        name = path.name.split(".")[0]
        if name in NON_COMMERCIAL:
            continue
        pairs = read_nli_file(path)
        tr = [p for p in pairs if not heldout_premise(p.premise)]
        held += [p for p in pairs if heldout_premise(p.premise)]
        rng.shuffle(tr)
        train += tr[:min(cap, SKEWED_CAP.get(name, cap))]
        used.append(name)
    return train, held, used


# --- synthetic pairs from QA paragraphs ------------------------------------------------

_NUMBER = re.compile(r"\b\d[\d,]*(?:\.\d+)?\b")
_AUX = re.compile(r"\b(is|are|was|were|has|have|had|can|could|will|would|should|did|does|do)\b")
_NEGATED = re.compile(r"\b(is|are|was|were|has|have|had|can|could|will|would|should|did|does|do)"
                      r" not\b")
_NAME = re.compile(r"\b[A-Z][a-z]+(?: [A-Z][a-z]+)*\b")


def _sentences(text: str) -> list[str]:
    return [text[a:b] for a, b in sentence_bounds(text)]


def _swap_number(s: str, rng: random.Random) -> str | None:
    nums = _NUMBER.findall(s)
    if not nums:
        return None
    old = rng.choice(nums)
    value = float(old.replace(",", ""))
    new = value + rng.choice([-1, 1]) * max(1, round(abs(value) * rng.choice([0.1, 0.25, 0.5, 1.0])))
    new_text = str(int(new)) if new == int(new) else f"{new:.1f}"
    if "," in old and abs(new) >= 1000:
        new_text = f"{int(new):,}"
    return s.replace(old, new_text, 1) if new_text != old else None


def _flip_negation(s: str, rng: random.Random) -> str | None:
    m = _NEGATED.search(s)
    if m:
        return s[:m.start()] + m.group(1) + s[m.end():]
    m = _AUX.search(s)
    if m:
        return s[:m.end()] + " not" + s[m.end():]
    return None


def _swap_name(s: str, paragraph: str, rng: random.Random) -> str | None:
    """A capitalised name of the sentence replaced by another name from the same paragraph."""
    mine = [n for n in _NAME.findall(s) if s.find(n) > 0]  # not the sentence's first word
    others = sorted(set(_NAME.findall(paragraph)) - set(_NAME.findall(s)))
    if not mine or not others:
        return None
    return s.replace(rng.choice(mine), rng.choice(others), 1)


def _swap_antonym(s: str, rng: random.Random) -> str | None:
    from qacheck.opposites import antonyms

    words = re.findall(r"\b[a-z]{3,}\b", s)
    rng.shuffle(words)
    for w in words:
        opp = sorted(antonyms(w))
        if opp:
            return re.sub(rf"\b{w}\b", opp[0].replace("_", " "), s, count=1)
    return None


#: comparison words and their reversals: the edit that questions cannot see ("rose" / "fell")
_REVERSALS = (("more", "less"), ("higher", "lower"), ("larger", "smaller"), ("bigger", "smaller"),
              ("before", "after"), ("earlier", "later"), ("older", "younger"),
              ("increased", "decreased"), ("rose", "fell"), ("above", "below"),
              ("first", "last"), ("won", "lost"), ("longer", "shorter"), ("faster", "slower"),
              ("most", "least"), ("largest", "smallest"), ("highest", "lowest"),
              ("oldest", "youngest"), ("greater", "lesser"), ("increase", "decrease"),
              ("majority", "minority"), ("gained", "lost"), ("exceeded", "fell short of"))
_REVERSE = {**dict(_REVERSALS), **{b: a for a, b in _REVERSALS}}


def _reverse_comparison(s: str, rng: random.Random) -> str | None:
    """A comparison word of the sentence replaced by its reversal ("before" -> "after")."""
    hits = [m for m in re.finditer(r"\b[a-z]+\b", s) if m.group() in _REVERSE]
    if not hits:
        return None
    m = rng.choice(hits)
    return s[:m.start()] + _REVERSE[m.group()] + s[m.end():]


def paragraphs_by_title(qa_path: Path) -> dict[str, list[str]]:
    """The distinct paragraphs of a QA training file, by article title (read by ``datasets``)."""
    from datasets import Features, List, Value, load_dataset

    text = Value("string")
    # "meta" differs in shape between sources: read it as a JSON string, so one schema fits
    features = Features({"id": text, "title": text, "context": text, "question": text,
                         "answers": {"text": List(text), "answer_start": List(Value("int64"))},
                         "source": text, "meta": text})
    ds = load_dataset("json", data_files=str(qa_path), split="train", features=features)
    by_title: dict[str, list[str]] = {}
    for title, context in zip(ds["title"], ds["context"]):
        paras = by_title.setdefault(title, [])
        if context not in paras:
            paras.append(context)
    return by_title


def synthetic_pairs(qa_path: Path, n_paragraphs: int, seed: int) -> list[NLIPair]:
    """Entailed, contradicted and unsupported claims against QA paragraphs (Kryscinski et al.)."""

    rng = random.Random(seed)
    by_title = paragraphs_by_title(qa_path)
    titles = sorted(by_title)
    rng.shuffle(titles)
    out: list[NLIPair] = []
    #: up to this many paragraphs of one article, so that many articles are seen
    per_title = 3
    picks = [(title, para) for title in titles
             for para in rng.sample(by_title[title], min(per_title, len(by_title[title])))]
    rng.shuffle(picks)
    used = 0
    for title, para in picks:
        if used >= n_paragraphs:
            break
        paras = by_title[title]
        sents = [x for x in _sentences(para) if 6 <= len(x.split()) <= 45]
        if len(para.split()) > 220 or not sents:
            continue
        used += 1
        claim = rng.choice(sents)
        out.append(NLIPair(para, claim, 0, "qa_sentence"))
        for make in rng.sample([lambda c: _swap_number(c, rng), lambda c: _flip_negation(c, rng),
                                lambda c: _swap_name(c, para, rng),
                                lambda c: _swap_antonym(c, rng),
                                lambda c: _reverse_comparison(c, rng)], 5):
            changed = make(claim)
            if changed and changed != claim:
                out.append(NLIPair(para, changed, 1, "qa_changed"))
                break
        others = [x for p in paras if p != para for x in _sentences(p) if 6 <= len(x.split()) <= 45]
        if others and rng.random() < 0.5:
            out.append(NLIPair(para, rng.choice(others), 2, "qa_other_paragraph"))
        else:  # the claim with a clause the paragraph never states (an added fact)
            elsewhere = [x for x in _sentences(rng.choice(by_title[rng.choice(titles)]))
                         if 6 <= len(x.split()) <= 30]
            if elsewhere:
                extra = elsewhere[0].rstrip(".!?")
                out.append(NLIPair(para, f"{claim.rstrip('.!? ')}, and {extra[0].lower()}{extra[1:]}.",
                                   2, "qa_added_clause"))
    return out


def _inflected_antonym(word: str) -> str | None:
    """A WordNet antonym of ``word`` in ``word``'s form: "wider" -> "narrower", "rose" stays
    unhandled (None) when the form cannot be rebuilt simply."""
    from qacheck.opposites import antonyms

    opp = sorted(a for a in antonyms(word) if "_" not in a)
    if not opp:
        return None
    if opp[0] in antonyms(opp[0]) or word in antonyms(opp[0]):  # same form both ways
        return opp[0]
    for ending in ("er", "est", "ly", "ed", "s"):
        if word.endswith(ending):
            base = opp[0][:-1] if opp[0].endswith("e") and ending in ("er", "est", "ed") else opp[0]
            return base + ending
    return opp[0]


def _swap_two_names(s: str, rng: random.Random) -> str | None:
    """Two different names of one sentence trade places ("A beat B" -> "B beat A")."""
    names = list(dict.fromkeys(n for n in _NAME.findall(s) if len(n) > 2))
    if len(names) < 2:
        return None
    a, b = rng.sample(names, 2)
    if a in b or b in a:
        return None
    return s.replace(a, "\x00").replace(b, a).replace("\x00", b)


def contrast_pairs(qa_path: Path, n_paragraphs: int, seed: int) -> list[NLIPair]:
    """Minimal pairs that questions cannot see, each beside its unchanged original.

    For a sentence of a QA paragraph: a WordNet antonym put in its place in
    the same form ("wider" -> "narrower"), a comparison reversed ("before" ->
    "after"), two names swapped ("A beat B" -> "B beat A") or a negation
    added or dropped is contradicted; the unchanged sentence is entailed.
    Half the premises are the paragraph, half the sentence alone, so that the
    reader cannot lean on length or on words the claim shares with the rest.
    """
    rng = random.Random(seed + 1)
    by_title = paragraphs_by_title(qa_path)
    paras = [p for ps in by_title.values() for p in ps if len(p.split()) <= 220]
    rng.shuffle(paras)
    out: list[NLIPair] = []

    def antonym_edit(c: str) -> str | None:
        words = [m for m in re.finditer(r"\b[a-z]{3,}\b", c)]
        rng.shuffle(words)
        for m in words[:8]:
            opp = _inflected_antonym(m.group())
            if opp:
                return c[:m.start()] + opp + c[m.end():]
        return None

    edits = (antonym_edit, lambda c: _reverse_comparison(c, rng),
             lambda c: _swap_two_names(c, rng), lambda c: _flip_negation(c, rng))
    for para in paras[:n_paragraphs]:
        sents = [x for x in _sentences(para) if 6 <= len(x.split()) <= 40]
        if not sents:
            continue
        claim = rng.choice(sents)
        for edit in rng.sample(edits, len(edits)):
            changed = edit(claim)
            if changed and changed != claim:
                premise = para if rng.random() < 0.5 else claim
                out.append(NLIPair(premise, claim, 0, "contrast_original"))
                out.append(NLIPair(premise, changed, 1, "contrast_edit"))
                break
    return out


# --- model and training -----------------------------------------------------------------

class _WithTwoWayLoss(torch.nn.Module):
    """Sequence classifier whose loss also takes two-way labels.

    Three-way labels use cross-entropy; a ``NOT_ENTAILED`` label maximises
    P(contradicted) + P(not supported), since the set does not say which.
    """

    def __init__(self, model: torch.nn.Module) -> None:
        super().__init__()
        self.model = model

    def forward(self, labels: torch.Tensor, **batch: torch.Tensor):
        logits = self.model(**batch).logits.float()
        log_p = torch.log_softmax(logits, dim=-1)
        three = labels < NOT_ENTAILED
        two_way = torch.logsumexp(log_p[:, 1:], dim=-1)
        picked = log_p.gather(1, labels.clamp(max=2).unsqueeze(1)).squeeze(1)
        loss = -torch.where(three, picked, two_way).mean()
        return type("Out", (), {"loss": loss, "logits": logits})()


def featurize(pairs: list[NLIPair], tokenizer) -> list[dict[str, Any]]:
    enc = tokenizer([p.premise for p in pairs], [p.hypothesis for p in pairs],
                    truncation="only_first", max_length=MAX_LEN)
    return [{"input_ids": ids, "token_type_ids": tt, "label": p.label}
            for ids, tt, p in zip(enc["input_ids"], enc["token_type_ids"], pairs)]


def make_collate(feats: list[dict[str, Any]], pad_id: int):
    def collate(idx: list[int]) -> dict[str, torch.Tensor]:
        rows = [feats[i] for i in idx]
        return {**pad_rows(rows, pad_id), "labels": torch.tensor([r["label"] for r in rows])}
    return collate


def train_nli(data: Path, out: Path, cfg: LoopConfig, limit: int | None = None,
              qa_data: Path | None = None, synthetic: int = 15_000, contrast: int = 0,
              file_cap: int = PER_FILE_CAP, base: str | None = None,
              init: Path | None = None, log=print) -> dict[str, Any]:
    """Build the mix, train, and export a loadable model folder into ``out/model``.

    ``data`` is the folder of entailment files; ``qa_data`` the QA training
    file whose paragraphs give ``synthetic`` paragraphs' worth of built pairs.
    """
    from transformers import AutoModelForSequenceClassification, AutoTokenizer

    from qacheck.train.qa import base_model_path

    start = str(init) if init else (base or base_model_path())
    tok = AutoTokenizer.from_pretrained(start)
    t0 = time.time()
    train, held, used = published_pairs(Path(data), cfg.seed, file_cap)
    built = synthetic_pairs(qa_data, synthetic, cfg.seed) if qa_data and synthetic else []
    built += contrast_pairs(qa_data, contrast, cfg.seed) if qa_data and contrast else []
    built_train = [p for p in built if not heldout_premise(p.premise)]
    train += built_train
    random.Random(cfg.seed).shuffle(train)
    if limit:
        train = train[:limit]
    feats = featurize(train, tok)
    counts = {name: sum(p.source == name for p in train) for name in sorted({p.source for p in train})}
    log(f"{len(train)} training pairs ({len(built_train)} built from QA paragraphs), "
        f"{len(held)} published pairs held out by premise, in {time.time() - t0:.0f}s")
    model = AutoModelForSequenceClassification.from_pretrained(
        start, num_labels=3, id2label=dict(enumerate(LABELS)),
        label2id={n: i for i, n in enumerate(LABELS)}, dtype=torch.float32,
        attention_probs_dropout_prob=0.0)
    wrapped = _WithTwoWayLoss(model)
    summary = train_loop(wrapped, len(feats), [len(f["input_ids"]) for f in feats],
                         make_collate(feats, tok.pad_token_id), out, cfg)
    from qacheck.models.lock import sha256_file

    return export_model(model, tok, out, {
        "files_used": {name: sha256_file(Path(data) / f"{name}.jsonl.gz") for name in used},
        "excluded_non_commercial": sorted(NON_COMMERCIAL),
        "per_file_cap": file_cap, "skewed_caps": SKEWED_CAP, "contrast_paragraphs": contrast,
        "pairs_per_source": counts,
        "built_from_qa_paragraphs": len(built_train), "qa_data": str(qa_data) if qa_data else None,
        "heldout": "premises whose sha256 falls in the lowest 5%", "max_len": MAX_LEN,
        "init": str(init) if init else None}, cfg, Path(qa_data or data), summary)
