"""The terminal view of one pair: the verdict, each sentence, and why each flagged one is flagged."""
from __future__ import annotations

from rich.console import Console
from rich.markup import escape
from rich.table import Table

from qacheck.reports.views import excerpt, sentence_views
from qacheck.results import CAUTION, PairResult

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
    cut = next((v.cut for v in views if v.cut is not None),
               next((s.reason.cut for s in result.sentences if s.reason), None))
    console.print(f"[{STYLE[result.label]}]{result.label.upper()}[/] P(faithful) "
                  f"{_fmt(result.score)} (flagged under {_fmt(cut)})  "
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
        if v.questions:
            table = Table(show_header=True, header_style="bold", box=None, padding=(0, 1))
            for col in ("question", "output", "source", "p(none)", "outcome"):
                table.add_column(col, overflow="fold")
            for q in v.questions:
                table.add_row(escape(q["question"]), escape(q["output_answer"]),
                              escape(q["source_answer"]) if q["source_answer"] is not None else "-",
                              f"{q['no_answer_prob']:.2f}",
                              f"[{STYLE[q['outcome']]}]{q['outcome']}[/]")
            console.print(table, highlight=False)
            first = v.questions[0]
            if first["source_start"] is not None:
                console.print("   source: " + escape(excerpt(result.source, first["source_start"],
                                                             first["source_end"])), highlight=False)
        if v.novel_words:
            console.print("   words the source never uses: " + escape(", ".join(v.novel_words)),
                          highlight=False)
    console.print(f"\n[dim]{escape(result.signature['text'])}[/]", highlight=False)
    console.print(f"[dim italic]{CAUTION}[/]", highlight=False)
