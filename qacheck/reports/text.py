"""Terminal views: one pair (the verdict, each sentence, why each flagged one is flagged) and
one run (totals, the gate, what failed)."""
from __future__ import annotations

from typing import Any

from rich.console import Console
from rich.markup import escape

from qacheck.reports.views import cut_of, marked_excerpt, sentence_views
from qacheck.results import CAUTION, FLAGGED, PairResult

STYLE = {"supported": "green", "contradicted": "bold red", "unverifiable": "yellow",
         "consistent": "green", "inconsistent": "bold red", "unscored": "dim"}


def _fmt(score: float | None) -> str:
    return "  -  " if score is None else f"{score:.2f}"


def render_pair(result: PairResult, console: Console, verbose: bool = False) -> None:
    """Print a pair: the verdict line, each sentence with its score, then the reasons.

    Scores are P(faithful) on one scale for sentences and the pair (the pair
    takes its weakest sentence's); the cut is printed with them.  Each flagged
    sentence (every sentence with ``verbose``) gets its rule, the reason in
    words, the source's value as a suggested fix, and its questions.
    """
    d = result.to_dict(include_texts=True)
    views = sentence_views(d, verbose)
    cut = cut_of(d)
    by_rule = sum(1 for x in result.sentences
                  if x.label in FLAGGED and x.reason and x.reason.rule != "evidence")
    rules = f"; {by_rule} flagged by a rule whatever the score" if by_rule else ""
    console.print(f"[{STYLE[result.label]}]{result.label.upper()}[/] P(faithful) "
                  f"{_fmt(result.score)} (a sentence under {_fmt(cut)} is flagged{rules})  "
                  + "  ".join(f"{k}: {v}" for k, v in sorted(result.counts.items()))
                  + f"  unchecked: {result.unchecked_share:.0%}", highlight=False)
    for w in result.warnings:
        console.print(f"[bold yellow]warning:[/] {escape(w)}", highlight=False)
    for s in result.sentences:
        console.print(f"[{STYLE[s.label]}]{s.label:>12}[/] {_fmt(s.score)}  {escape(s.text)}",
                      highlight=False)
    for i, v in enumerate(views, 1):
        console.print(f"\n[{STYLE[v.label]}]{i}. {v.label}[/] by {v.rule}: {escape(v.text)}",
                      highlight=False)
        console.print(f"   why: {escape(v.why)}", highlight=False)
        if v.suggestion:
            console.print(f"   fix: [bold]{escape(v.suggestion)}[/]", highlight=False)
        for n, q in enumerate(v.questions, 1):
            src = q["source_answer"]
            console.print(f"   Q{n} {escape(q['question'])}", highlight=False)
            console.print(f"      output: {escape(q['output_answer'])} | source: "
                          + (escape(src) if src is not None else "(no answer)")
                          + f" | p(no answer) {q['no_answer_prob']:.2f} | "
                          f"[{STYLE[q['outcome']]}]{q['outcome']}[/]", highlight=False)
            if q["source_start"] is not None:
                before, answer, after = marked_excerpt(result.source, q["source_start"],
                                                       q["source_end"])
                console.print(f"      in the source: {escape(before)}[bold underline]"
                              f"»{escape(answer)}«[/]{escape(after)}", highlight=False)
        if v.novel_words:
            console.print("   words the source never uses: " + escape(", ".join(v.novel_words)),
                          highlight=False)
    console.print(f"\n[dim]{escape(result.signature['text'])}[/]", highlight=False)
    console.print(f"[dim italic]{CAUTION}[/]", highlight=False)


#: how a case's status is marked in the terminal: a word, never colour alone
CASE_MARK = {"fail": ("FAIL", "bold red"), "error": ("ERROR", "bold magenta"),
             "unscored": ("UNSCORED", "yellow"), "pass": ("pass", "green")}


#: the terminal lists at most this many cases that did not pass; the reports list more
TERMINAL_CASES = 25


def render_run(summary: dict[str, Any], records: list[dict[str, Any]],
               gate_messages: list[str] | None, gate_ok: bool | None, folder: str,
               console: Console) -> None:
    """The terminal view of a run: totals, the gate's decision, then what failed, worst first.

    ``records`` are the cases the run kept whole, worst first
    (``qacheck.tally.worst_first``); those that did not pass are listed in
    that order (at most ``TERMINAL_CASES``) with each flagged sentence, the
    rule that flagged it, the deciding number and the source's value as a fix; passing
    cases are only counted.  Plain lines, no tables, so the view reads the
    same at 80 columns and in a CI log.
    """
    st = summary["status"]
    mean = summary["mean_score"]
    console.print(f"[bold]{escape(summary['set'])}[/] / {escape(summary['outputs'])}: "
                  f"{summary['cases']} cases - {st.get('pass', 0)} passed, "
                  f"{st.get('fail', 0)} failed, {st.get('error', 0)} errors, "
                  f"{st.get('unscored', 0)} unscored; mean P(faithful) {_fmt(mean)}",
                  highlight=False)
    if gate_ok is None:
        console.print("gate: no baseline given", highlight=False)
    else:
        word = "[green]passed[/]" if gate_ok else "[bold red]FAILED[/]"
        console.print(f"gate: {word}", highlight=False)
        for m in gate_messages or []:
            console.print(f"  - {escape(m)}", highlight=False)
    bad = [r for r in records if r["status"] != "pass"]
    not_passed = sum(st.get(k, 0) for k in ("fail", "error", "unscored"))
    console.print(f"\n[bold]cases that did not pass[/] ({not_passed})" if not_passed else
                  "\ncases that did not pass: none", highlight=False)
    for r in bad[:TERMINAL_CASES]:
        word, style = CASE_MARK.get(r["status"], (r["status"], "bold"))
        console.print(f"[{style}]{word}[/] {escape(r['id'])}  P(faithful) {_fmt(r['score'])}",
                      highlight=False)
        for reason in r.get("reasons", [])[:1] if not r.get("result") else []:
            console.print(f"    {escape(reason)}", highlight=False)
        for v in sentence_views(r.get("result")):
            console.print(f"    [{STYLE[v.label]}]{v.label}[/] by {v.rule}: \"{escape(v.text)}\"",
                          highlight=False)
            console.print(f"      why: {escape(v.why)}", highlight=False)
            if v.suggestion:
                console.print(f"      fix: {escape(v.suggestion)}", highlight=False)
    if not_passed > min(len(bad), TERMINAL_CASES):
        console.print(f"... and {not_passed - min(len(bad), TERMINAL_CASES)} more: "
                      "report.html and summary.md list the worst, results.jsonl has every case",
                      highlight=False)
    # paths and file:line references are never broken across lines
    for p in summary.get("problems", []):
        console.print(f"[yellow]input problem:[/] {escape(p)}", highlight=False, soft_wrap=True)
    for cid in summary.get("warned_cases", []):
        console.print(f"[yellow]warning:[/] {escape(cid)}: see its result", highlight=False,
                      soft_wrap=True)
    console.print(f"\nreports: {escape(folder)} (report.html, summary.md, junit.xml)",
                  highlight=False, soft_wrap=True)
    console.print(f"[dim]{escape(summary['signature']['text'])}[/]", highlight=False)
    console.print(f"[dim italic]{CAUTION}[/]", highlight=False)
