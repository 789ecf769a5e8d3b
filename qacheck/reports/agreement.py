"""Terminal table of agreement figures, pipeline beside both baselines."""
from __future__ import annotations

from typing import Any

from rich.console import Console
from rich.table import Table


def _f(v) -> str:
    return "-" if v is None else f"{v:.3f}"


def render_agreement(res: dict[str, Any], console: Console) -> None:
    table = Table(title="agreement with human judgements")
    for col in ("file", "n", "ROC AUC", "bal. acc.", "ROUGE-L P AUC", "MiniLM cos AUC",
                "sent. P", "sent. R", "type match"):
        table.add_column(col)
    for name, f in res["files"].items():
        b = f["baselines"]
        table.add_row(name, str(f["n"]), _f(f["roc_auc"]), _f(f["balanced_accuracy"]),
                      _f(b["rougeL_precision"]["roc_auc"]),
                      _f(b.get("minilm_cosine", {}).get("roc_auc")),
                      _f(f.get("sentence_precision")), _f(f.get("sentence_recall")),
                      _f(f.get("type_match")))
    console.print(table)
    console.print(f"overall ROC AUC {_f(res['overall']['roc_auc'])} on {res['overall']['n']} records")
    if "fit" in res:
        console.print(f"fitted pair threshold {res['fit']['pair_consistent']:.4f} "
                      f"(balanced accuracy {res['fit']['balanced_accuracy_fitted']:.3f} on the fitting data)")
        for name, h in res["fit"]["leave_one_file_out"].items():
            console.print(f"  {name}: balanced accuracy {h['balanced_accuracy']:.3f} with the cut "
                          f"fitted on the other files ({h['cut_from_other_files']:.3f})")
    console.print(f"[dim]signature: {res['signature']['text']}[/]")
