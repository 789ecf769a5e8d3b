"""Terminal table of agreement figures, pipeline beside both baselines."""
from __future__ import annotations

from typing import Any

from rich.console import Console
from rich.table import Table


def _f(v) -> str:
    return "-" if v is None else f"{v:.3f}"


def _table(title: str, files: dict[str, Any]) -> Table:
    table = Table(title=title)
    for col in ("file", "n", "ROC AUC", "bal. acc.", "ROUGE-L P AUC", "word cov. AUC",
                "MiniLM cos AUC", "sent. P", "sent. R", "type match"):
        table.add_column(col)
    for name, f in files.items():
        b = f["baselines"]
        table.add_row(name, str(f["n"]), _f(f["roc_auc"]), _f(f["balanced_accuracy"]),
                      _f(b["rougeL_precision"]["roc_auc"]), _f(b["word_coverage"]["roc_auc"]),
                      _f(b.get("minilm_cosine", {}).get("roc_auc")),
                      _f(f.get("sentence_precision")), _f(f.get("sentence_recall")),
                      _f(f.get("type_match")))
    return table


def _held_out(console: Console, title: str, held: dict[str, Any]) -> None:
    console.print(title)
    for name, h in held.items():
        base = h.get("baselines", {})
        console.print(f"  {name}: ROC AUC {_f(h['roc_auc'])} (ROUGE-L P "
                      f"{_f(base.get('rougeL_precision'))}, word coverage "
                      f"{_f(base.get('word_coverage'))}), balanced accuracy "
                      f"{h['balanced_accuracy']:.3f} (cut {h['cut_from_other_files']:.3f}), "
                      f"sentence P/R {_f(h['sentence_precision'])}/{_f(h['sentence_recall'])}, "
                      f"typed-conflict precision {_f(h['conflict_precision'])} "
                      f"over {h['conflict_flags']} flags")


def render_agreement(res: dict[str, Any], console: Console) -> None:
    console.print(_table("agreement with human judgements", res["files"]))
    if "overall" in res:
        console.print(f"overall ROC AUC {_f(res['overall']['roc_auc'])} on {res['overall']['n']} records")
    if "fit" in res:
        fit = res["fit"]
        console.print(f"fitted the sentence model on {fit['n_sentences']} labelled sentences; cut "
                      f"{fit['model']['cut']:.4f}, typed-conflict precision "
                      f"{fit['model']['conflict_precision']:.3f} over {fit['n_conflict_flags']} flags "
                      f"(pair balanced accuracy {fit['balanced_accuracy_fitted']:.3f} on the fitting "
                      "data). The figures above used the model shipped before this fit.")
        console.print(_table("in sample: judged again with the model just fitted on them",
                             fit["in_sample"]))
        _held_out(console, "held out (model and cut fitted on the other files only):",
                  fit["leave_one_file_out"])
        if "leave_one_file_out_also" in fit:
            _held_out(console, f"the same held-out models on a {fit['held_out_limit']}-record "
                      "sample of each file:", fit["leave_one_file_out_also"])
    console.print(f"[dim]{res['signature']['text']}[/]")
