"""Thresholds and settings in one object, and the reproducibility signature.

Two results are comparable only when their signatures match: the signature
names the qacheck version, the sha256 of every model file (through a digest
of models.lock entries), and every threshold that shapes a verdict.
"""
from __future__ import annotations

import hashlib
import json
from dataclasses import asdict, dataclass, fields, replace
from importlib import resources
from typing import Any

from qacheck import __version__
from qacheck.errors import InputError


@dataclass(frozen=True)
class Thresholds:
    """Decision thresholds; the shipped defaults live in ``qacheck/thresholds.json``."""

    #: the source "has no answer" when its no-answer probability exceeds this
    no_answer: float = 0.5
    #: answers agree (supported) at or above this token F1
    support_f1: float = 0.5
    #: a question survives the round trip when the output answer has this F1 with its span
    round_trip_f1: float = 0.5
    #: weight of answer agreement in a question's score; the rest is answerability alone.
    #: 0.5 measured best-balanced on the development judgements (README, "Measured")
    agreement_weight: float = 0.5
    #: at most this many answer spans are checked per sentence
    max_spans_per_sentence: int = 6
    #: a sentence is also flagged under this P(faithful), even where the fitted cut is lower:
    #: a stricter release gate for a scenario set (0 keeps the fitted cut alone)
    sentence_floor: float = 0.0

    @classmethod
    def shipped(cls) -> "Thresholds":
        """The defaults shipped with the package (written by ``qacheck agreement --fit``)."""
        text = resources.files("qacheck").joinpath("thresholds.json").read_text(encoding="utf-8")
        return cls.from_dict(json.loads(text)["thresholds"], origin="qacheck/thresholds.json")

    @classmethod
    def from_dict(cls, data: dict[str, Any], origin: str = "thresholds") -> "Thresholds":
        """Build from a mapping (missing names take the dataclass defaults)."""
        return cls().merged(data, origin)

    def merged(self, data: dict[str, Any], origin: str = "thresholds") -> "Thresholds":
        """A copy with the thresholds in ``data`` changed, refusing unknown names and non-numbers
        so that a typo in a config file is an error, not a silently ignored setting."""
        known = {f.name for f in fields(self)}
        for key in data:
            if key not in known:
                raise InputError(f"unknown threshold (known: {', '.join(sorted(known))})", path=origin,
                                 field=key)
        values = {}
        for key, value in data.items():
            if not isinstance(value, (int, float)) or isinstance(value, bool):
                raise InputError("must be a number", path=origin, field=key)
            values[key] = int(value) if key == "max_spans_per_sentence" else float(value)
        return replace(self, **values)

    def as_dict(self) -> dict[str, Any]:
        return asdict(self)


#: bumped whenever a rule that shapes a verdict changes (answer matching, judging, segmenting),
#: so results from older rules never mix with new ones in a cache or a baseline
RULES_REVISION = 14


def signature(models: dict[str, str], thresholds: Thresholds,
              runtime: dict[str, Any]) -> dict[str, Any]:
    """The reproducibility signature: everything that can change a result.

    ``models`` maps each model to its sha256; ``runtime`` holds every runtime
    setting of the models (window, stride, n-best, answer length, beams,
    question clipping), the precision mode, the spaCy model and the versions
    of torch, transformers and spaCy.  ``id`` hashes all of it with the
    qacheck version, the thresholds and ``RULES_REVISION``; ``text`` is the
    one line printed under every result.
    """
    body = {"version": __version__, "rules": RULES_REVISION,
            "models": dict(sorted(models.items())), "thresholds": thresholds.as_dict(),
            "runtime": dict(sorted(runtime.items()))}
    digest = hashlib.sha256(json.dumps(body, sort_keys=True).encode()).hexdigest()[:12]
    body["id"] = digest
    short = ", ".join(f"{k} {v[:8]}" for k, v in sorted(models.items()))
    body["text"] = (f"signature {digest} (qacheck {__version__}, rules r{RULES_REVISION}, "
                    f"{runtime.get('precision', '?')}; {short})")
    return body
