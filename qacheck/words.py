"""Content words and their stems: what "the source never uses this word" means.

Shared by the pair model (the share of an output's words the source lacks)
and the drafter (a seq2seq question must not bring words of its own).
Words are compared by Porter stem (NLTK), so "opened" finds "opens"; spaCy's
English stop words are not content words.
"""
from __future__ import annotations

import re
from functools import lru_cache

_WORD = re.compile(r"[A-Za-z0-9][A-Za-z0-9'\-.]*[A-Za-z0-9]|[A-Za-z0-9]")


@lru_cache(maxsize=1)
def _stop_words() -> frozenset[str]:
    from spacy.lang.en.stop_words import STOP_WORDS

    return frozenset(STOP_WORDS)


@lru_cache(maxsize=65536)
def _stem(word: str) -> str:
    """Porter stem (NLTK), so "opened" in the output finds "opens" in the source."""
    return _porter().stem(word)


@lru_cache(maxsize=1)
def _porter():
    from nltk.stem.porter import PorterStemmer

    return PorterStemmer()


@lru_cache(maxsize=32)
def _source_stems(source: str) -> frozenset[str]:
    """The stems of the source's words (cached: every sentence of an output asks again)."""
    return frozenset(_stem(w.lower()) for w in _WORD.findall(source))


def novel_words(text: str, source: str) -> tuple[list[str], int]:
    """The content words of ``text`` whose stem the source never uses, and how many content
    words ``text`` has (spaCy's English stop words are not content words)."""
    source_stems = _source_stems(source)
    stop = _stop_words()
    content = [w for w in _WORD.findall(text) if w.lower() not in stop]
    return [w for w in content if _stem(w.lower()) not in source_stems], len(content)
