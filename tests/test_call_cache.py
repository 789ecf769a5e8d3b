"""The per-call cache: each (question, context) answered and each (evidence, claim) read once."""
from __future__ import annotations

from dataclasses import replace

from qacheck.cache import ResultCache, memoised
from qacheck.pipeline import Checker


def test_memoised_computes_only_unseen_items_once_and_keeps_order(tmp_path):
    store = ResultCache(tmp_path / "c.sqlite")
    asked: list[list[tuple[str, str]]] = []

    def call(items):
        asked.append(list(items))
        return [len(q) + len(c) for q, c in items]

    items = [("a", "xx"), ("bb", "x"), ("a", "xx")]  # a repeated item is computed once
    assert memoised(call, items, store, "m1", int, int) == [3, 3, 3]
    assert asked == [[("a", "xx"), ("bb", "x")]]
    # "a" + "xx" and "ax" + "x" must not share a key (each text ends with a separator)
    assert memoised(call, [("ax", "x"), ("bb", "x")], store, "m1", int, int) == [3, 3]
    assert asked[-1] == [("ax", "x")]
    # another scope (a new model or setting) computes again
    memoised(call, [("bb", "x")], store, "m2", int, int)
    assert asked[-1] == [("bb", "x")]


def test_checker_with_a_store_reuses_every_answer_and_gives_the_same_result(tmp_path, checker):
    store = ResultCache(tmp_path / "c.sqlite")
    stored = Checker(checker.thresholds, qa=checker.qa, qg=checker.qg or False,
                     model=checker.model, nli=checker.nli or False, store=store)
    src = "The ferry left Varrow at 6:15 and reached the island at 8:40 after a calm crossing."
    out = "The ferry reached the island at 8:40."
    first = stored.check(src, out)
    calls = []
    real = stored.qa.answer

    def counting(items):
        calls.append(len(items))
        return real(items)

    stored.qa.answer = counting
    try:
        again = stored.check(src, out)
    finally:
        del stored.qa.answer
    assert calls == []  # nothing reached the QA model
    assert replace(again, signature={}).to_dict() == replace(first, signature={}).to_dict()
    assert first.to_dict() == checker.check(src, out).to_dict()
