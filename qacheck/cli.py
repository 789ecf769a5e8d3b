"""The ``qacheck`` command line: parse, call, render, exit code. No scoring logic here.

Exit status: 0 success, 1 a gate failed (regression, integrity), 2 bad input.
"""
from __future__ import annotations

import json
import os
import time
import sys
from pathlib import Path

import click
from rich.console import Console

from qacheck import __version__
from qacheck.errors import InputError, ModelIntegrityError, QacheckError

err = Console(stderr=True)


def _fail(exc: QacheckError) -> None:
    err.print(f"[bold red]error:[/] {exc}", markup=True, highlight=False)
    sys.exit(2 if isinstance(exc, (InputError, ModelIntegrityError)) else 1)


class _Group(click.Group):
    """Turns qacheck's own errors into one clear line and an exit status."""

    def invoke(self, ctx):
        try:
            return super().invoke(ctx)
        except QacheckError as exc:
            _fail(exc)


@click.group(cls=_Group, context_settings={"help_option_names": ["-h", "--help"]})
@click.version_option(__version__, prog_name="qacheck")
def main() -> None:
    """qacheck: check each sentence of a generated text against its source.

    Questions are drafted from answer spans of the output, answered on the
    source and on the output by a shipped QA model, and the answers compared.
    An automatic score is not proof: high-stakes text needs human review.
    """


def _thresholds(path: str | None):
    from qacheck.config import Thresholds

    if not path:
        return Thresholds.shipped()
    try:
        data = json.loads(Path(path).read_text(encoding="utf-8"))
    except json.JSONDecodeError as exc:
        raise InputError(f"not valid JSON: {exc.msg}", path=path, line=exc.lineno) from exc
    except OSError as exc:
        raise InputError(f"cannot read: {exc.strerror}", path=path) from exc
    return Thresholds.shipped().merged(data.get("thresholds", data), origin=path)


def check_writable(path: str | None, what: str = "out") -> None:
    """Refuse an output path whose folder is missing or read-only, before any model loads."""
    if not path:
        return
    folder = Path(path).resolve().parent
    if not folder.is_dir():
        raise InputError("folder does not exist", path=folder, field=what)
    if not os.access(folder, os.W_OK):
        raise InputError("folder is not writable", path=folder, field=what)


def _check_folder(folder: Path, what: str) -> None:
    """A results folder must be creatable and writable; checked before any model loads."""
    probe = folder
    while not probe.exists() and probe.parent != probe:
        probe = probe.parent
    if not probe.is_dir() or not os.access(probe, os.W_OK):
        raise InputError("not a writable folder", path=probe, field=what)


def _write(text: str, out: str | None) -> None:
    """Write a report; if that fails, keep the computed result beside in a temporary file."""
    if not out:
        click.echo(text)
        return
    try:
        Path(out).write_text(text, encoding="utf-8")
    except OSError as exc:
        import tempfile

        fd, kept = tempfile.mkstemp(prefix="qacheck-", suffix=Path(out).suffix)
        with os.fdopen(fd, "w", encoding="utf-8") as fh:
            fh.write(text)
        raise InputError(f"cannot write ({exc.strerror}); the result was kept in {kept}",
                         path=out, field="out") from exc


@main.command()
@click.argument("source", required=False)
@click.argument("output", required=False)
@click.option("--source-text", help="The source as a string instead of a file.")
@click.option("--output-text", help="The output as a string instead of a file.")
@click.option("--format", "fmt", type=click.Choice(["text", "json", "html"]), default="text",
              show_default=True)
@click.option("--out", type=click.Path(dir_okay=False), help="Write the report here.")
@click.option("--thresholds", "thr_file", type=click.Path(dir_okay=False),
              help="JSON file overriding shipped thresholds.")
@click.option("--verbose", is_flag=True,
              help="Show the questions and reasons of supported sentences too.")
def score(source, output, source_text, output_text, fmt, out, thr_file, verbose) -> None:
    """Score one OUTPUT against its SOURCE (paths; '-' reads stdin)."""
    from qacheck.pipeline import Checker, read_text

    if source_text is None and source is None:
        raise click.UsageError("give SOURCE or --source-text")
    if source_text is not None and output_text is not None and source is not None:
        raise click.UsageError("give the texts as files or as --source-text/--output-text, "
                               "not both")
    if source_text is not None and source is not None and output is not None:
        raise click.UsageError("--source-text replaces SOURCE: give OUTPUT alone")
    if output_text is None:
        if output is None and source_text is not None:
            output, source = source, None
        if output is None:
            raise click.UsageError("give OUTPUT or --output-text")
    check_writable(out)
    src = source_text if source_text is not None else read_text(source, "source")
    outp = output_text if output_text is not None else read_text(output, "output")
    for name, text in (("source", src), ("output", outp)):
        if not text.strip():
            raise InputError("empty text", field=name)
    result = Checker(thresholds=_thresholds(thr_file)).check(src, outp)
    if fmt == "json":
        _write(json.dumps(result.to_dict(), indent=2, ensure_ascii=False), out)
    elif fmt == "html":
        from qacheck.reports.html import render

        _write(render("pair.html.j2", title="qacheck report", pair=result, verbose=verbose), out)
    else:
        from qacheck.reports.text import render_pair

        if out:
            import io

            buf = io.StringIO()
            render_pair(result, Console(file=buf, width=120, no_color=True), verbose)
            _write(buf.getvalue(), out)
        else:
            render_pair(result, Console(), verbose)


# --- nightly runs ---------------------------------------------------------------------

@main.command()
@click.argument("set_dir", metavar="SET", type=click.Path(exists=True, file_okay=False))
@click.option("--outputs", help="Outputs file of one generator version (a path, or a name under SET/outputs/).")
@click.option("--results", "results_dir", type=click.Path(file_okay=False),
              help="Results folder [default: results/SET-OUTPUTS].")
@click.option("--baseline", type=click.Path(exists=True, file_okay=False),
              help="A previous results folder to gate against.")
@click.option("--tolerance", type=float, help="Allowed drop of the mean score [set.toml gate, else 0.02].")
@click.option("--allow-signature-mismatch", is_flag=True,
              help="Gate against a baseline scored under another signature anyway.")
@click.option("--workers", default=1, show_default=True, help="Scoring processes.")
@click.option("--batch-size", default=1, show_default=True,
              help="Cases per model batch; each batch's results are on disk as it finishes.")
@click.option("--cache", "cache_path", type=click.Path(dir_okay=False),
              help="Result cache file [default: $QACHECK_CACHE or ~/.cache/qacheck].")
@click.option("--no-cache", is_flag=True, help="Do not read or write the result cache.")
def run(set_dir, outputs, results_dir, baseline, tolerance, allow_signature_mismatch, workers,
        batch_size, cache_path, no_cache) -> None:
    """Score every case of a scenario SET; write results, summary, Markdown, JUnit and HTML.

    Exit 0 when all is well, 1 when a case fails or the baseline gate trips,
    2 on bad input (after scoring every case that could be scored).
    """
    from rich.progress import BarColumn, MofNCompleteColumn, Progress, TextColumn, TimeRemainingColumn

    from qacheck.cache import ResultCache, default_path
    from qacheck.config import Thresholds
    from qacheck.reports.markdown import render_run
    from qacheck.reports.run import write_run_reports
    from qacheck.runner import Scorer, gate, run_set
    from qacheck.scenarios import load_set

    sset = load_set(set_dir, outputs)
    for p in sset.problems:
        err.print(f"[yellow]input problem:[/] {p}", highlight=False)
    thr = Thresholds.shipped().merged(sset.thresholds, origin=str(Path(set_dir) / "set.toml"))
    folder = Path(results_dir or Path("results") / f"{Path(set_dir).name}-{sset.outputs_name}")
    _check_folder(folder, "results")
    if not no_cache:
        cache_file = Path(cache_path) if cache_path else default_path()
        _check_folder(cache_file.parent, "cache")
        if cache_file.exists() and not os.access(cache_file, os.W_OK):
            raise InputError("cache file is not writable", path=cache_file, field="cache")
    cache = None if no_cache else ResultCache(Path(cache_path) if cache_path else None)
    scorer = Scorer(thr, cache, workers=workers, batch_size=batch_size)
    columns = (TextColumn("[progress.description]{task.description}"), BarColumn(),
               MofNCompleteColumn(), TimeRemainingColumn())
    try:
        with Progress(*columns, console=err, transient=False) as prog:
            task = prog.add_task(f"scoring {sset.name}", total=len(sset.cases))
            outcome = run_set(sset, folder, scorer,
                              progress=lambda d, t: prog.update(task, completed=d, total=t))
    except KeyboardInterrupt:
        err.print(f"[yellow]interrupted[/]: finished cases are saved in {folder}; "
                  "rerun the same command to resume")
        sys.exit(130)
    messages, gate_ok = [], True
    if baseline:
        tol = tolerance if tolerance is not None else float(sset.gate.get("tolerance", 0.02))
        g = gate(outcome.summary, outcome.records, Path(baseline), tol, allow_signature_mismatch)
        messages, gate_ok = g.messages, g.ok
        if g.signature_mismatch:
            err.print(f"[bold red]WARNING: {messages[0]}[/]", highlight=False)
    write_run_reports(folder, outcome.summary, outcome.records, messages)
    click.echo(render_run(outcome.summary, outcome.records, messages))
    click.echo(f"results: {folder}")
    failed = outcome.summary["status"].get("fail", 0) + outcome.summary["status"].get("error", 0)
    if sset.problems:
        sys.exit(2)
    sys.exit(0 if gate_ok and not failed else 1)


@main.command()
@click.argument("a")
@click.argument("b")
@click.option("--set", "set_dir", type=click.Path(exists=True, file_okay=False),
              help="Score A and B (outputs files) on this set first, instead of reading results folders.")
@click.option("--format", "fmt", type=click.Choice(["text", "json", "markdown", "html"]),
              default="text", show_default=True)
@click.option("--out", type=click.Path(dir_okay=False))
@click.option("--seed", default=0, show_default=True, help="Seed of the resampling tests.")
@click.option("--resamples", default=10_000, show_default=True)
@click.option("--top", default=5, show_default=True, help="How many regressions and improvements to show.")
@click.option("--allow-signature-mismatch", is_flag=True)
def compare(a, b, set_dir, fmt, out, seed, resamples, top, allow_signature_mismatch) -> None:
    """Compare generator versions A and B (results folders of `qacheck run`) with paired statistics."""
    from qacheck.reports import version_diff as render_versions
    from qacheck.version_diff import compare_runs

    check_writable(out)
    if set_dir:
        a, b = (str(_score_outputs(set_dir, x)) for x in (a, b))
    c = compare_runs(Path(a), Path(b), resamples=resamples, seed=seed, top=top,
                     allow_mismatch=allow_signature_mismatch)
    if fmt == "json":
        text = json.dumps(c.as_dict(), indent=2, ensure_ascii=False)
    elif fmt == "markdown":
        text = render_versions.render_markdown(c)
    elif fmt == "html":
        text = render_versions.render_html(c)
    else:
        text = render_versions.render_text(c)
    _write(text, out)


def _score_outputs(set_dir: str, outputs: str) -> Path:
    """Run a set on one outputs file into results/SET-NAME and return that folder."""
    from qacheck.cache import ResultCache
    from qacheck.config import Thresholds
    from qacheck.reports.run import write_run_reports
    from qacheck.runner import Scorer, run_set
    from qacheck.scenarios import load_set

    sset = load_set(set_dir, outputs)
    thr = Thresholds.shipped().merged(sset.thresholds, origin=str(Path(set_dir) / "set.toml"))
    folder = Path("results") / f"{Path(set_dir).name}-{sset.outputs_name}"
    outcome = run_set(sset, folder, Scorer(thr, ResultCache()))
    write_run_reports(folder, outcome.summary, outcome.records)
    return folder


@main.command()
@click.argument("files", nargs=-1, required=True, type=click.Path(exists=True, dir_okay=False))
@click.option("--limit", type=int, help="A fixed random sample of N records per file.")
@click.option("--seed", default=0, show_default=True, help="Seed of the sample.")
@click.option("--json", "as_json", is_flag=True)
@click.option("--fit", is_flag=True,
              help="Fit the sentence model and its cut on these files (leave-one-file-out "
                   "figures reported) and ship them.")
@click.option("--no-cosine", is_flag=True, help="Skip the MiniLM cosine baseline.")
@click.option("--cache", "cache_path", type=click.Path(dir_okay=False))
def agreement(files, limit, seed, as_json, fit, no_cosine, cache_path) -> None:
    """Agreement with human faithfulness judgements (ROC AUC, balanced accuracy, sentences)."""
    from rich.progress import Progress

    from qacheck.human_agreement import fit_judge_model, rejudged_figures, run_agreement
    from qacheck.cache import ResultCache
    from qacheck.config import Thresholds
    from qacheck.runner import Scorer

    scorer = Scorer(Thresholds.shipped(), ResultCache(Path(cache_path) if cache_path else None),
                    batch_size=8)
    with Progress(console=err, transient=True) as prog:
        tasks: dict[str, int] = {}

        def progress(name, done, total):
            if name not in tasks:
                tasks[name] = prog.add_task(name, total=total)
            prog.update(tasks[name], completed=done)

        res = run_agreement([Path(f) for f in files], scorer, limit, seed, progress,
                            with_cosine=not no_cosine)
    raw = res.pop("raw")
    if fit:
        fitted = fit_judge_model(raw)
        _ship_judge_model(fitted, files, limit, seed, res["signature"]["id"])
        fitted["in_sample"] = rejudged_figures(raw, fitted["model"])
        fitted["model"] = fitted["model"].as_dict()
        res["fit"] = fitted
    if as_json:
        click.echo(json.dumps(res, indent=2))
        return
    from qacheck.reports.human_agreement import render_agreement

    render_agreement(res, Console())


def _ship_judge_model(fitted: dict, files, limit, seed, scored_under: str) -> None:
    """Write the fitted sentence model, its cut and conflict precision into the package
    (judge_model.json), with the files, sample and held-out figures it came from."""
    from importlib import resources

    origin = {"fitted_by": "qacheck agreement --fit", "files": [Path(f).name for f in files],
              "limit": limit, "seed": seed, "scored_under_signature": scored_under,
              "n_sentences": fitted["n_sentences"], "n_conflict_flags": fitted["n_conflict_flags"],
              "balanced_accuracy_fitted": round(fitted["balanced_accuracy_fitted"], 4),
              "leave_one_file_out": fitted["leave_one_file_out"],
              "date": time.strftime("%Y-%m-%d")}
    path = Path(str(resources.files("qacheck"))) / "judge_model.json"
    path.write_text(json.dumps({"origin": origin, "model": fitted["model"].as_dict()}, indent=2)
                    + "\n", encoding="utf-8")
    err.print(f"wrote the sentence model (cut {fitted['model'].cut_:.4f}) to {path}")


# --- models ---------------------------------------------------------------------------

@main.group(cls=_Group)
def models() -> None:
    """List, verify and evaluate the shipped models."""


@models.command("list")
def models_list() -> None:
    """Show every model in models.lock with its files, digests and provenance."""
    from rich.table import Table

    from qacheck.models.lock import lock_path, read_lock

    lock = read_lock()
    con = Console()
    con.print(f"lock file: {lock_path()}")
    for name, m in lock["models"].items():
        table = Table(title=f"{name}: {m.get('description', '')}", show_lines=False)
        table.add_column("file")
        table.add_column("sha256")
        for f, h in sorted(m["files"].items()):
            table.add_row(f, h)
        con.print(table)
        for key in ("base_model", "base_package", "license", "attribution"):
            if key in m:
                con.print(f"  {key}: {m[key]}")
        if "evaluation" in m:
            con.print(f"  evaluation: {json.dumps(m['evaluation'])}")


@models.command("verify")
def models_verify() -> None:
    """Check every shipped model file against its sha256 in models.lock (exit 1 on mismatch)."""
    from qacheck.models.lock import entry, read_lock

    bad = 0
    for name in read_lock()["models"]:
        try:
            entry(name).verify()
            click.echo(f"ok      {name} ({len(entry(name).files)} files, digest {entry(name).digest[:12]})")
        except ModelIntegrityError as exc:
            bad += 1
            click.echo(f"FAILED  {exc}")
    sys.exit(1 if bad else 0)


@models.group("eval", cls=_Group)
def models_eval() -> None:
    """Evaluate a shipped model on a data file."""


def _eval_options(data_help: str, unit: str):
    """The options every `models eval` command shares: data, sample, model folder, JSON."""
    def wrap(f):
        for opt in reversed([
            click.option("--data", required=True, type=click.Path(exists=True, dir_okay=False),
                         help=data_help),
            click.option("--limit", type=int, help=f"Evaluate a fixed random sample of N {unit}."),
            click.option("--model", "model_dir", type=click.Path(exists=True, file_okay=False),
                         help="A model folder instead of the shipped model."),
            click.option("--json", "as_json", is_flag=True, help="Print JSON."),
        ]):
            f = opt(f)
        return f
    return wrap


def _print_figures(res: dict, as_json: bool, digits: int) -> None:
    click.echo(json.dumps(res, indent=2) if as_json else
               "\n".join(f"{k}: {v:.{digits}f}" if isinstance(v, float) else f"{k}: {v}"
                         for k, v in res.items() if k != "examples"))


@models_eval.command("qa")
@_eval_options("SQuAD JSON (v1.1/v2.0) or JSONL records.", "questions")
@click.option("--heldout-seed", type=int,
              help="Evaluate the held-out titles (with constructed unanswerables) of a training file.")
def eval_qa_cmd(data, limit, heldout_seed, model_dir, as_json) -> None:
    """Exact match and F1 by the official SQuAD v1.1 rules (+ no-answer figures)."""
    from rich.progress import Progress

    from qacheck.evaluate import eval_qa
    from qacheck.models.qa import QAModel

    qa = QAModel(Path(model_dir)) if model_dir else QAModel()
    with Progress(console=err, transient=True) as prog:
        task = prog.add_task("answering", total=None)
        res = eval_qa(Path(data), limit, qa, heldout_seed,
                      progress=lambda d, t: prog.update(task, completed=d, total=t))
    _print_figures(res, as_json, 2)


@models_eval.command("qg")
@_eval_options("SQuAD JSON (v1.1/v2.0) or JSONL records.", "answers")
def eval_qg_cmd(data, limit, model_dir, as_json) -> None:
    """Round-trip answerability, BLEU-4 and ROUGE-L of drafted questions."""
    from qacheck.evaluate import eval_qg
    from qacheck.models.qg import QGModel

    res = eval_qg(Path(data), limit, qg=QGModel(Path(model_dir)) if model_dir else None)
    _print_figures(res, as_json, 3)


@models_eval.command("nli")
@_eval_options("One JSON Lines file of entailment pairs (premise, hypothesis, label).", "pairs")
@click.option("--heldout", is_flag=True,
              help="Only the pairs whose premise the trainer held out.")
def eval_nli_cmd(data, limit, heldout, model_dir, as_json) -> None:
    """Accuracy, balanced accuracy and per-class recall of the entailment reader."""
    from qacheck.evaluate import eval_nli
    from qacheck.models.nli import NLIModel

    res = eval_nli(Path(data), limit, NLIModel(Path(model_dir)) if model_dir else None, heldout)
    _print_figures(res, as_json, 3)


@models.command("lock")
@click.argument("name", type=click.Choice(["qa", "qg", "nli"]))
@click.option("--from", "src", required=True, type=click.Path(exists=True, file_okay=False),
              help="Model folder written by `qacheck train`.")
@click.option("--evaluation", type=click.Path(exists=True, dir_okay=False),
              help="JSON file of evaluation figures to record.")
def models_lock(name, src, evaluation) -> None:
    """Install a trained model into the package and pin its files in models.lock."""
    from qacheck.models.install import install_model

    entry = install_model(name, Path(src), Path(evaluation) if evaluation else None)
    click.echo(f"{name}: {len(entry['files'])} files pinned in models.lock")


# --- training -------------------------------------------------------------------------

@main.group(cls=_Group)
def train() -> None:
    """Train qacheck's own models (needs the `train` extra)."""


def _train_options(f):
    for opt in reversed([
        click.option("--data", required=True, type=click.Path(exists=True),
                     help="Training data: a file (qa, qg) or the folder of entailment files (nli)."),
        click.option("--out", required=True, type=click.Path(file_okay=False),
                     help="Run folder: checkpoint.pt, train.log, model/ at the end."),
        click.option("--seed", default=13, show_default=True),
        click.option("--batch-size", default=32, show_default=True),
        click.option("--lr", type=float, required=True),
        click.option("--epochs", default=1.0, show_default=True),
        click.option("--max-steps", type=int, help="Stop (and end the schedule) after N steps."),
        click.option("--limit", type=int, help="Use only the first N examples (smoke runs)."),
        click.option("--checkpoint-every", default=100, show_default=True),
        click.option("--no-bf16", is_flag=True, help="Train in fp32."),
        click.option("--init", type=click.Path(exists=True, file_okay=False, path_type=Path),
                     help="Continue from this model folder (e.g. qacheck/weights/qa or "
                          "qacheck/weights/qg) instead of the base encoder."),
    ]):
        f = opt(f)
    return f


@train.command("qa")
@_train_options
@click.option("--in-situ", default=0.0, show_default=True,
              help="Share of answerable examples that also get an in-situ question "
                   "(the answer sentence with the answer replaced by a wh-phrase).")
def train_qa_cmd(in_situ, **opts) -> None:
    """Fine-tune the QA model (with constructed unanswerables); resumes from OUT."""
    from qacheck.train.qa import train_qa

    _train(train_qa, **opts, in_situ=in_situ)


@train.command("qg")
@_train_options
@click.option("--max-novel", default=1.0, show_default=True,
              help="Drop training pairs whose question has more than this share of content "
                   "words absent from its sentence.")
def train_qg_cmd(max_novel, **opts) -> None:
    """Train the seq2seq question drafter; resumes from OUT."""
    from qacheck.train.qg import train_qg

    _train(train_qg, **opts, max_novel=max_novel)


@train.command("nli")
@_train_options
@click.option("--qa-data", type=click.Path(exists=True, dir_okay=False, path_type=Path),
              help="QA training file whose paragraphs give built claim pairs.")
@click.option("--synthetic", default=15_000, show_default=True,
              help="How many paragraphs to build claims from (0: none).")
def train_nli_cmd(qa_data, synthetic, **opts) -> None:
    """Train the claim-vs-evidence reader; --data is the folder of entailment files."""
    from qacheck.train.nli import train_nli

    _train(train_nli, **opts, qa_data=qa_data, synthetic=synthetic)


def _train(trainer, data, out, seed, batch_size, lr, epochs, max_steps, limit, checkpoint_every,
           no_bf16, **extra) -> None:
    from qacheck.train.loop import LoopConfig

    cfg = LoopConfig(seed=seed, batch_size=batch_size, lr=lr, epochs=epochs, max_steps=max_steps,
                     checkpoint_every=checkpoint_every, bf16=not no_bf16)
    info = trainer(Path(data), Path(out), cfg, limit=limit, log=err.print, **extra)
    click.echo(json.dumps(info, indent=2))


if __name__ == "__main__":
    main()
