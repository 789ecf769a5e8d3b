"""Content words and their stems: what "the source never uses this word" means.

Shared by the judge (the share of a sentence's words the source lacks, and
whether an answer span holds such a word) and the drafter (a seq2seq question
must not bring words of its own).  Words are compared by Porter stem (NLTK),
so "opened" finds "opens"; spaCy's English stop words are not content words.

A compound is the same word however its hyphen is spaced: generators that
emit tokenised text write "two - year", "al - Wefaq" and "30 - year - old"
where the source has "two-year", so the source's compounds also count by
their parts, and an output compound whose every part the source uses is not
new ("second-round" against "second round").
"""
from __future__ import annotations

import re
from functools import lru_cache

_WORD = re.compile(r"[A-Za-z0-9][A-Za-z0-9'\-.]*[A-Za-z0-9]|[A-Za-z0-9]")
_PARTS = re.compile(r"[-.']")


@lru_cache(maxsize=1)
def stop_words() -> frozenset[str]:
    from spacy.lang.en.stop_words import STOP_WORDS

    return frozenset(STOP_WORDS)


@lru_cache(maxsize=65536)
def stem(word: str) -> str:
    """Porter stem (NLTK), so "opened" in the output finds "opens" in the source."""
    return _porter().stem(word)


@lru_cache(maxsize=1)
def _porter():
    from nltk.stem.porter import PorterStemmer

    return PorterStemmer()


def _parts(word: str) -> list[str]:
    """The pieces of a compound ("30-year-old" -> 30, year, old); a plain word is one piece."""
    return [p for p in _PARTS.split(word) if p]


@lru_cache(maxsize=32)
def _source_stems(source: str) -> frozenset[str]:
    """Stems of the source's words and of their compound parts (cached: every sentence of an
    output asks again)."""
    words = [w.lower() for w in _WORD.findall(source)]
    return frozenset({stem(w) for w in words} | {stem(p) for w in words for p in _parts(w)})


def _used(word: str, source_stems: frozenset[str], stop: frozenset[str]) -> bool:
    """The source uses ``word``, whole or, for a compound, every content part of it."""
    if stem(word) in source_stems:
        return True
    parts = _parts(word)
    return len(parts) > 1 and all(p in stop or stem(p) in source_stems for p in parts)


def content_stems(text: str) -> list[str]:
    """Porter stems of the content words of ``text``, in order ("did not attend" -> attend)."""
    stop = stop_words()
    return [stem(w.lower()) for w in _WORD.findall(text) if w.lower() not in stop]


def novel_words(text: str, source: str) -> tuple[list[str], int]:
    """The content words of ``text`` that the source never uses, and how many content words
    ``text`` has (spaCy's English stop words are not content words)."""
    source_stems = _source_stems(source)
    stop = stop_words()
    content = [w for w in _WORD.findall(text) if w.lower() not in stop]
    return [w for w in content if not _used(w.lower(), source_stems, stop)], len(content)
