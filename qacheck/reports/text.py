"""The terminal view of one pair: sentences with labels, evidence under flagged ones."""
from __future__ import annotations

from rich.console import Console
from rich.markup import escape
from rich.table import Table

from qacheck.results import CAUTION, PairResult

STYLE = {"supported": "green", "contradicted": "bold red", "unverifiable": "yellow",
         "unchecked": "dim", "consistent": "green", "inconsistent": "bold red", "unscored": "dim"}


def _fmt(score: float | None) -> str:
    return "  -  " if score is None else f"{score:.2f}"


def render_pair(result: PairResult, console: Console) -> None:
    """Print a pair: the verdict line, each sentence, and evidence for flagged sentences."""
    label = result.label
    console.print(f"[{STYLE[label]}]{label.upper()}[/] score {_fmt(result.score)}  "
                  + "  ".join(f"{k}: {v}" for k, v in sorted(result.counts.items())))
    for i, s in enumerate(result.sentences, 1):
        console.print(f"[{STYLE[s.label]}]{s.label:>12}[/] {_fmt(s.score)}  "
                      f"[{STYLE[s.label]}]{escape(s.text)}[/]")
        if s.label in ("contradicted", "unverifiable"):
            table = Table(show_header=True, header_style="bold", box=None, padding=(0, 1))
            for col in ("question", "output says", "source says", "p(no answer)", "F1", "outcome"):
                table.add_column(col)
            for q in s.questions:
                table.add_row(escape(q.question), escape(q.output_answer),
                              escape(q.source_answer) if q.source_answer is not None else "[dim]-[/]",
                              f"{q.no_answer_prob:.2f}", f"{q.f1:.2f}",
                              f"[{STYLE[q.outcome]}]{q.outcome}[/]")
            console.print(table)
            if s.novel_words:
                console.print(f"    [dim]words the source never uses:[/] "
                              f"{escape(', '.join(s.novel_words))}")
            for q in s.questions:
                if q.outcome == "contradicted" and q.source_start is not None:
                    console.print(f"    [dim]source:[/] {escape(result.source_excerpt(q))}")
    console.print(f"[dim]signature: {result.signature['text']} (id {result.signature['id']})[/]")
    console.print(f"[dim italic]{CAUTION}[/]")
