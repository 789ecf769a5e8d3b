"""Opposite words and one-sided negation: two answers that share words yet disagree.

"north quay" and "south quay" share half their words, "not guilty" holds all
of "guilty"; by token overlap both pairs agree.  Antonyms come from WordNet
3.0 (read by nltk from Debian's ``wordnet-base``, which installs offline),
plus compass directions, which WordNet does not list as antonyms in every
form.  WordNet is optional at run time: without it only the direction table
and negation apply, and the signature records that (``wordnet_available``).
"""
from __future__ import annotations

import re
from functools import lru_cache
from pathlib import Path

WORDNET_DIR = Path("/usr/share/wordnet")
_LEXNAMES_MAN = Path("/usr/share/man/man5/lexnames.5WN.gz")

#: compass directions and their opposites (a fact of geography, not a parse)
_DIRECTIONS = {"north": "south", "east": "west", "northern": "southern", "eastern": "western",
               "northeast": "southwest", "northwest": "southeast", "northbound": "southbound",
               "eastbound": "westbound", "northeastern": "southwestern",
               "northwestern": "southeastern", "upstream": "downstream", "inbound": "outbound",
               "upper": "lower", "uphill": "downhill", "upward": "downward", "up": "down"}
#: verbs of news and reports that state opposite outcomes, which WordNet 3.0 does not list as
#: antonyms (checked against the installed database; the pairs are common English usage)
_VERB_OPPOSITES = {"approve": "reject", "confirm": "deny", "allow": "ban", "support": "oppose",
                   "gain": "lose", "expand": "shrink", "grow": "shrink", "lift": "impose",
                   "extend": "shorten", "praise": "criticise", "arrive": "depart",
                   "acquit": "convict", "accept": "decline", "raise": "cut"}


def _both_ways(pairs: dict[str, str]) -> dict[str, frozenset[str]]:
    """Each word of a table of opposites, with every word it is opposite to."""
    out: dict[str, set[str]] = {}
    for a, b in pairs.items():
        out.setdefault(a, set()).add(b)
        out.setdefault(b, set()).add(a)
    return {w: frozenset(v) for w, v in out.items()}


_OPPOSITE = _both_ways({**_DIRECTIONS, **_VERB_OPPOSITES})

#: words that negate what follows; "n't" is split off by the tokeniser below
NEGATORS = frozenset({"not", "no", "never", "n't", "without", "none", "nobody", "nothing",
                      "neither", "nor", "cannot", "nowhere", "non"})
#: how alike two answers must be, negation aside, for a one-sided negation to be a conflict
NEGATION_SAME_F1 = 0.6
_TOKEN = re.compile(r"n't|[a-z0-9]+(?=n't)|[a-z0-9]+(?:-[a-z0-9]+)*", re.I)


def tokens(text: str) -> list[str]:
    """Lower-case word tokens with "n't" split off ("didn't" -> "did", "n't")."""
    return [t.lower() for t in _TOKEN.findall(text)]


@lru_cache(maxsize=1)
def _wordnet_folder() -> Path | None:
    """A folder nltk can read WordNet 3.0 from, or None when Debian's files are not installed.

    nltk also wants WordNet's ``lexnames`` table, which Debian ships only as
    the lexnames(5WN) manual page; the table is read from there into a cache
    folder beside copies of the database files (nltk refuses linked files).
    No nltk import here: the signature asks only whether WordNet is present.
    """
    import gzip
    import os
    import shutil

    if not (WORDNET_DIR / "data.adj").exists() or not _LEXNAMES_MAN.exists():
        return None
    cache = Path(os.environ.get("QACHECK_CACHE_DIR", Path.home() / ".cache" / "qacheck")) / "wordnet"
    cache.mkdir(parents=True, exist_ok=True)
    for f in WORDNET_DIR.iterdir():  # nltk refuses links, hard or symbolic: copy once
        copy = cache / f.name
        if f.is_file() and not copy.exists():
            tmp = copy.with_suffix(f".{os.getpid()}")
            shutil.copyfile(f, tmp)
            tmp.replace(copy)
    lex = cache / "lexnames"
    if not lex.exists():
        rows = [ln.split()[:2] for ln in
                gzip.open(_LEXNAMES_MAN, "rt", encoding="utf-8").read().splitlines()
                if re.match(r"^\d\d\t\S+\s", ln)]
        if [int(i) for i, _ in rows] != list(range(len(rows))):
            return None  # not the table nltk expects: do without WordNet rather than misread it
        tmp = lex.with_suffix(f".{os.getpid()}")
        tmp.write_text("".join(f"{i}\t{name}\t0\n" for i, name in rows))
        tmp.replace(lex)
    return cache


@lru_cache(maxsize=1)
def _wordnet():
    """nltk's WordNet reader over ``_wordnet_folder()``, or None without WordNet."""
    cache = _wordnet_folder()
    if cache is None:
        return None
    import nltk.data
    from nltk.corpus.reader.wordnet import WordNetCorpusReader

    if str(cache) not in nltk.data.path:  # nltk reads only from folders it is told of
        nltk.data.path.append(str(cache))
    import warnings

    class Reader(WordNetCorpusReader):
        def map_wn(self, version: str = "wordnet") -> None:
            """No mapping between WordNet versions: only the English 3.0 database is read."""
            return None

    with warnings.catch_warnings():  # "multilingual functions are not available": not used
        warnings.simplefilter("ignore", UserWarning)
        return Reader(str(cache), None)


def wordnet_available() -> bool:
    return _wordnet_folder() is not None


@lru_cache(maxsize=16384)
def antonyms(word: str) -> frozenset[str]:
    """Every WordNet antonym of any base form of ``word`` (all parts of speech), plus the
    directions and report verbs of the tables above ("rejected" -> approve)."""
    out = set(_OPPOSITE.get(word, ()))
    wn = _wordnet()
    if wn is not None:
        for pos in ("a", "s", "r", "v", "n"):
            for base in {word, *(wn._morphy(word, pos) or [])}:
                out.update(_OPPOSITE.get(base, ()))
                for lemma in wn.lemmas(base, pos):
                    out.update(a.name().lower() for a in lemma.antonyms())
    return frozenset(out)


def _base_forms(word: str) -> set[str]:
    wn = _wordnet()
    forms = {word}
    if wn is not None:
        for pos in ("a", "r", "v", "n"):
            forms.update(wn._morphy(word, pos) or [])
    return forms


def opposite_pair(a: str, b: str) -> tuple[str, str] | None:
    """A word of ``a`` and a word of ``b`` that are opposites, among the words they do not share."""
    ta, tb = tokens(a), tokens(b)
    only_a = [w for w in ta if w not in tb]
    only_b = [w for w in tb if w not in ta]
    for x in only_a:
        ax = antonyms(x)
        for y in only_b:
            if ax & _base_forms(y) or antonyms(y) & _base_forms(x):
                return x, y
    return None


def one_sided_negation(a: str, b: str) -> bool:
    """Exactly one of two answers is negated, and apart from the negation they say the same
    thing ("not guilty" / "guilty", "no increase" / "increase", "did not attend" / "attended").

    "The same thing" is a token F1 of at least ``NEGATION_SAME_F1`` between the answers'
    content-word stems (``qacheck.words.content_stems``; negators are stop words).  Without it a
    long source answer that happens to hold a "not" somewhere ("the poll, saying there was not a
    genuine choice") would contradict any short answer.  A bare denial ("none", "never") has no
    content words and conflicts with any answer that is not negated.
    """
    from collections import Counter

    from qacheck.words import content_stems

    if any(t in NEGATORS for t in tokens(a)) == any(t in NEGATORS for t in tokens(b)):
        return False
    ca, cb = content_stems(a), content_stems(b)
    negated = ca if any(t in NEGATORS for t in tokens(a)) else cb
    if not negated:
        return True
    same = sum((Counter(ca) & Counter(cb)).values())
    return bool(same) and 2 * same / (len(ca) + len(cb)) >= NEGATION_SAME_F1
