"""Is a text English? The models read English only, so other languages get a warning.

A cheap test rather than a language identifier model: English running text
is made up of a large share of English function words (spaCy's English stop
words), and of Latin letters.  German, Chinese or Arabic text fails one or
the other; a short English text full of names can fail too, which is why the
result is a warning, never an error.
"""
from __future__ import annotations

import re

_WORDS = re.compile(r"[^\W\d_]+")
#: below this share of English stop words among the words, a text does not read as English
MIN_STOP_SHARE = 0.2
#: below this share of Latin letters among the letters, it is another script
MIN_LATIN_SHARE = 0.8
#: texts shorter than this many words are not judged (a title, a number)
MIN_WORDS = 8


def looks_english(text: str) -> bool:
    """False when ``text`` is clearly not English running text (see the module note)."""
    from spacy.lang.en.stop_words import STOP_WORDS

    letters = [ch for ch in text if ch.isalpha()]
    if letters and sum(ch.isascii() or "\u00c0" <= ch <= "\u024f" for ch in letters) \
            < MIN_LATIN_SHARE * len(letters):
        return False
    words = _WORDS.findall(text.lower())
    if len(words) < MIN_WORDS:
        return True
    return sum(w in STOP_WORDS for w in words) >= MIN_STOP_SHARE * len(words)


def language_warnings(source: str, output: str) -> list[str]:
    """One warning per text that does not look English."""
    return [f"the {name} does not look like English; qacheck's models read English only, "
            "so its verdicts on this pair mean little"
            for name, text in (("source", source), ("output", output)) if not looks_english(text)]
