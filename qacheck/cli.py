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
from rich.markup import escape

from qacheck import __version__
from qacheck.errors import InputError, ModelIntegrityError, QacheckError

err = Console(stderr=True)


def _fail(exc: QacheckError) -> None:
    # one line whatever the terminal width; the message's own brackets are text, not markup
    err.print(f"[bold red]error:[/] {escape(str(exc))}", highlight=False, soft_wrap=True)
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


#: what each checker stage is doing, in words, for the progress line of ``score``
STAGE_WORDS = {"segment": "splitting sentences, finding answer spans",
               "draft_rules": "drafting questions", "qa_output": "round trip on the output",
               "draft_seq2seq": "drafting questions (seq2seq)",
               "retrieve": "finding source passages", "qa_source": "answering on the source",
               "claims": "reading sentences as claims", "judge": "judging"}


#: file suffix of each report format
SUFFIX = {"text": ".txt", "json": ".json", "markdown": ".md", "html": ".html"}


def format_options(allowed: tuple[str, ...]):
    """``--format`` (one or several, comma-separated), ``--json`` and ``--out``, one grammar
    for every command that renders a report."""
    def wrap(f):
        for opt in reversed([
            click.option("--format", "fmt", default="text", show_default=True,
                         help=f"One or several of {', '.join(allowed)}, comma-separated "
                              "(e.g. json,html): every format from one scoring."),
            click.option("--json", "as_json", is_flag=True, help="Shorthand for --format json."),
            click.option("--out", type=click.Path(dir_okay=False),
                         help="Write the report here; with several formats, a path whose "
                              "suffix each format replaces (report -> report.json, "
                              "report.html)."),
        ]):
            f = opt(f)
        return f
    return wrap


def report_targets(fmt: str, as_json: bool, out: str | None,
                   allowed: tuple[str, ...]) -> dict[str, str | None]:
    """Each requested format and where it goes (None: standard output), checked before any
    work: unknown formats are usage errors and every target folder must be writable."""
    formats = ["json"] if as_json else [f.strip() for f in fmt.split(",") if f.strip()]
    unknown = [f for f in formats if f not in allowed]
    if unknown or not formats:
        raise click.UsageError(f"--format: {', '.join(unknown) or 'nothing given'} is not one of "
                               f"{', '.join(allowed)}")
    formats = list(dict.fromkeys(formats))
    if len(formats) == 1:
        targets = {formats[0]: out}
    elif not out:
        raise click.UsageError("several formats need --out (a path whose suffix each replaces)")
    else:
        stem = Path(out)
        stem = stem.with_suffix("") if stem.suffix in SUFFIX.values() else stem
        targets = {f: str(stem) + SUFFIX[f] for f in formats}
    for path in targets.values():
        check_writable(path)
    return targets


def _render_pair_text(result, verbose: bool, width: int | None = None) -> str:
    import io

    from qacheck.reports.text import render_pair

    buf = io.StringIO()
    render_pair(result, Console(file=buf, width=width or 100, no_color=True), verbose)
    return buf.getvalue()


@main.command()
@click.argument("source", required=False)
@click.argument("output", required=False)
@click.option("--source-text", help="The source as a string instead of a file.")
@click.option("--output-text", help="The output as a string instead of a file.")
@format_options(("text", "json", "html"))
@click.option("--thresholds", "thr_file", type=click.Path(dir_okay=False),
              help="JSON file overriding shipped thresholds.")
@click.option("--verbose", is_flag=True,
              help="Show the questions and reasons of supported sentences too.")
@click.option("--cache", "cache_path", type=click.Path(dir_okay=False),
              help="Result cache file [default: $QACHECK_CACHE or ~/.cache/qacheck].")
@click.option("--no-cache", is_flag=True, help="Do not read or write the result cache.")
def score(source, output, source_text, output_text, fmt, as_json, out, thr_file, verbose,
          cache_path, no_cache) -> None:
    """Score one OUTPUT against its SOURCE (paths; '-' reads stdin)."""
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
    targets = report_targets(fmt, as_json, out, ("text", "json", "html"))
    cache = _open_cache(cache_path, no_cache)
    from qacheck.pipeline import read_text
    from qacheck.results import PairResult
    from qacheck.runner import Scorer

    src = source_text if source_text is not None else read_text(source, "source")
    outp = output_text if output_text is not None else read_text(output, "output")
    for name, text in (("source", src), ("output", outp)):
        if not text.strip():
            raise InputError("empty text", field=name)
    scorer = Scorer(_thresholds(thr_file), cache)
    with err.status("loading models", spinner="line") as status:  # shown on terminals only
        scorer.checker.on_stage = lambda name: status.update(STAGE_WORDS.get(name, name))
        result = PairResult.from_dict(next(scorer.score([(src, outp)]))[1])
    for f, path in targets.items():
        if f == "json":
            _write(json.dumps(result.to_dict(), indent=2, ensure_ascii=False), path)
        elif f == "html":
            from qacheck.reports.html import render
            from qacheck.reports.views import cut_of

            _write(render("pair.html.j2", title="qacheck report", pair=result, verbose=verbose,
                          cut=cut_of(result.to_dict())), path)
        elif path:
            _write(_render_pair_text(result, verbose, 120), path)
        else:
            from qacheck.reports.text import render_pair

            render_pair(result, Console(), verbose)


def _open_cache(cache_path: str | None, no_cache: bool):
    """The result cache (checked writable before any model loads), or None with --no-cache."""
    if no_cache:
        return None
    from qacheck.cache import ResultCache, default_path

    cache_file = Path(cache_path) if cache_path else default_path()
    _check_folder(cache_file.parent, "cache")
    if cache_file.exists() and not os.access(cache_file, os.W_OK):
        raise InputError("cache file is not writable", path=cache_file, field="cache")
    return ResultCache(cache_file)


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
@click.option("--engine", type=click.Choice(["local", "ray"]), default="local", show_default=True,
              help="Where new pairs are scored: this machine, or actors on a Ray cluster.")
@click.option("--workers", default=1, show_default=True,
              help="Scoring processes of the local engine.")
@click.option("--ray-address", metavar="ADDR",
              help="Ray cluster to join [default: $RAY_ADDRESS]; 'local' starts a private "
                   "one-machine instance.")
@click.option("--actors", type=click.IntRange(min=1),
              help="Ray actors, each with its own models (about 0.9 GB) [default: the "
                   "cluster's CPUs / --actor-cpus].")
@click.option("--actor-cpus", type=click.IntRange(min=1), default=1, show_default=True,
              help="CPUs (and torch threads) per Ray actor: fewer, larger actors need less memory.")
@click.option("--batch-size", default=1, show_default=True,
              help="Cases per model batch; each batch's results are on disk as it finishes.")
@click.option("--cache", "cache_path", type=click.Path(dir_okay=False),
              help="Result cache file [default: $QACHECK_CACHE or ~/.cache/qacheck].")
@click.option("--no-cache", is_flag=True, help="Do not read or write the result cache.")
def run(set_dir, outputs, results_dir, baseline, tolerance, allow_signature_mismatch, engine,
        workers, ray_address, actors, actor_cpus, batch_size, cache_path, no_cache) -> None:
    """Score every case of a scenario SET; write results, summary, Markdown, JUnit and HTML.

    Exit 0 when all is well, 1 when a case fails or the baseline gate trips,
    2 on bad input (after scoring every case that could be scored).
    """
    from rich.progress import BarColumn, MofNCompleteColumn, Progress, TextColumn, TimeRemainingColumn

    from qacheck.config import Thresholds
    from qacheck.reports.run import write_run_reports
    from qacheck.runner import Scorer, gate, run_set
    from qacheck.scenarios import load_set

    sset = load_set(set_dir, outputs)
    for p in sset.problems:
        err.print(f"[yellow]input problem:[/] {p}", highlight=False, soft_wrap=True)
    thr = Thresholds.shipped().merged(sset.thresholds, origin=str(Path(set_dir) / "set.toml"))
    folder = Path(results_dir or Path("results") / f"{Path(set_dir).name}-{sset.outputs_name}")
    _check_folder(folder, "results")
    if engine != "ray" and (ray_address or actors or actor_cpus != 1):
        raise InputError("--ray-address, --actors and --actor-cpus need --engine ray",
                         field="--engine")
    if engine == "ray" and workers != 1:
        raise InputError("--workers is for the local engine; the Ray engine takes --actors",
                         field="--workers")
    scorer = Scorer(thr, _open_cache(cache_path, no_cache), workers=workers, batch_size=batch_size)
    if engine == "ray":
        from qacheck.ray_engine import RayEngine

        scorer.engine = RayEngine(thr, {"signature": scorer.signature["id"],
                                        "evidence": scorer.checker.evidence_signature["id"]},
                                  address=ray_address, actors=actors, actor_cpus=actor_cpus)
    columns = (TextColumn("[progress.description]{task.description}"), BarColumn(),
               MofNCompleteColumn(), TimeRemainingColumn())
    try:
        with Progress(*columns, console=err, transient=False, disable=not err.is_terminal) as prog:
            task = prog.add_task(f"scoring {sset.name}", total=len(sset.cases))
            outcome = run_set(sset, folder, scorer,
                              progress=lambda d, t: prog.update(task, completed=d, total=t))
    except KeyboardInterrupt:
        err.print(f"[yellow]interrupted[/]: finished cases are saved in {folder}; "
                  "rerun the same command to resume")
        sys.exit(130)
    finally:
        scorer.engine.close()
    if getattr(scorer.engine, "resubmitted", 0):
        err.print(f"{scorer.engine.resubmitted} batches sent again after an actor or node was "
                  "lost; each case is in the results once", highlight=False)
    messages, gate_ok = [], True
    if baseline:
        tol = tolerance if tolerance is not None else float(sset.gate.get("tolerance", 0.02))
        g = gate(outcome.summary, outcome.tally.rows.values(), Path(baseline), tol,
                 allow_signature_mismatch)
        messages, gate_ok = g.messages, g.ok
        if g.signature_mismatch:
            err.print(f"[bold red]WARNING: {messages[0]}[/]", highlight=False)
    write_run_reports(folder, outcome.summary, outcome.tally, messages if baseline else None)
    from qacheck.reports.text import render_run

    render_run(outcome.summary, outcome.tally.worst(), messages, gate_ok if baseline else None,
               str(folder), Console())
    failed = outcome.summary["status"].get("fail", 0) + outcome.summary["status"].get("error", 0)
    if sset.problems:
        sys.exit(2)
    sys.exit(0 if gate_ok and not failed else 1)


@main.command()
@click.argument("a")
@click.argument("b")
@click.option("--set", "set_dir", type=click.Path(exists=True, file_okay=False),
              help="Score A and B (outputs files) on this set first, instead of reading results folders.")
@format_options(("text", "json", "markdown", "html"))
@click.option("--seed", default=0, show_default=True, help="Seed of the resampling tests.")
@click.option("--resamples", default=10_000, show_default=True,
              help="Resamples of the paired bootstrap and permutation tests.")
@click.option("--top", default=5, show_default=True, help="How many regressions and improvements to show.")
@click.option("--allow-signature-mismatch", is_flag=True,
              help="Compare results scored under different signatures anyway.")
def compare(a, b, set_dir, fmt, as_json, out, seed, resamples, top,
            allow_signature_mismatch) -> None:
    """Compare generator versions A and B (results folders of `qacheck run`) with paired statistics."""
    targets = report_targets(fmt, as_json, out, ("text", "json", "markdown", "html"))
    from qacheck.reports import version_diff as render_versions
    from qacheck.version_diff import compare_runs

    if set_dir:
        a, b = (str(_score_outputs(set_dir, x)) for x in (a, b))
    c = compare_runs(Path(a), Path(b), resamples=resamples, seed=seed, top=top,
                     allow_mismatch=allow_signature_mismatch)
    render = {"json": lambda: json.dumps(c.as_dict(), indent=2, ensure_ascii=False),
              "markdown": lambda: render_versions.render_markdown(c),
              "html": lambda: render_versions.render_html(c),
              "text": lambda: render_versions.render_text(c)}
    for f, path in targets.items():
        _write(render[f](), path)


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
    write_run_reports(folder, outcome.summary, outcome.tally)
    return folder


@main.command()
@click.argument("files", nargs=-1, required=True, type=click.Path(exists=True, dir_okay=False))
@click.option("--limit", type=int, help="A fixed random sample of N records per file.")
@click.option("--seed", default=0, show_default=True, help="Seed of the sample.")
@format_options(("text", "json"))
@click.option("--fit", is_flag=True,
              help="Fit the sentence model and its cut on these files (leave-one-file-out "
                   "figures reported) and ship them.")
@click.option("--held-out-limit", type=int,
              help="With --fit: also judge an N-record sample of each file (same seed) by the "
                   "model fitted on the other files, e.g. the sample earlier figures used.")
@click.option("--no-cosine", is_flag=True, help="Skip the MiniLM cosine baseline.")
@click.option("--cache", "cache_path", type=click.Path(dir_okay=False),
              help="Result cache file [default: $QACHECK_CACHE or ~/.cache/qacheck].")
def agreement(files, limit, seed, fmt, as_json, out, fit, held_out_limit, no_cosine,
              cache_path) -> None:
    """Agreement with human faithfulness judgements (ROC AUC, balanced accuracy, sentences)."""
    targets = report_targets(fmt, as_json, out, ("text", "json"))
    from rich.progress import Progress

    from qacheck.human_agreement import fit_judge_model, rejudged_figures, run_agreement
    from qacheck.cache import ResultCache
    from qacheck.config import Thresholds
    from qacheck.runner import Scorer

    from qacheck.judge import SentenceModel
    from qacheck.pipeline import Checker

    try:
        model = SentenceModel.shipped()
    except ValueError as exc:  # the feature set changed: only a fit can make a new model
        if not fit:
            raise InputError(f"{exc}; refit it with --fit", path="qacheck/judge_model.json")
        model = SentenceModel.untrained()
    cache = ResultCache(Path(cache_path) if cache_path else None)
    checker = Checker(Thresholds.shipped(), model=model, store=cache)
    scorer = Scorer(Thresholds.shipped(), cache, batch_size=8, checker=checker)
    with Progress(console=err, transient=True) as prog:
        tasks: dict[str, int] = {}

        def progress(name, done, total):
            if name not in tasks:
                tasks[name] = prog.add_task(name, total=total)
            prog.update(tasks[name], completed=done)

        res = run_agreement([Path(f) for f in files], scorer, limit, seed, progress,
                            with_cosine=not no_cosine)
        also = None
        if fit and held_out_limit:
            also = run_agreement([Path(f) for f in files], scorer, held_out_limit, seed,
                                 progress, with_cosine=False)["raw"]
    raw = res.pop("raw")
    if fit:
        fitted = fit_judge_model(raw, also=also)
        if also:
            fitted["held_out_limit"] = held_out_limit
        _ship_judge_model(fitted, files, limit, seed, res["signature"]["id"])
        fitted["in_sample"] = rejudged_figures(raw, fitted["model"])
        fitted["model"] = fitted["model"].as_dict()
        res["fit"] = fitted
        if model == SentenceModel.untrained():  # the figures above judged every sentence 0.5
            res["files"] = fitted["in_sample"]
            res.pop("overall")
    for f, path in targets.items():
        if f == "json":
            _write(json.dumps(res, indent=2), path)
            continue
        from qacheck.reports.human_agreement import render_agreement

        if path:
            import io

            buf = io.StringIO()
            render_agreement(res, Console(file=buf, width=120, no_color=True))
            _write(buf.getvalue(), path)
        else:
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
              **({"held_out_limit": fitted["held_out_limit"],
                  "leave_one_file_out_at_held_out_limit": fitted["leave_one_file_out_also"]}
                 if "held_out_limit" in fitted else {}),
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
        for key, value in sorted((m.get("evaluation") or {}).items()):
            con.print(f"  evaluation, {key}: {_figure_text(value)}", highlight=False)


def _figure_text(value) -> str:
    """A recorded figure as words: numbers to four digits, one level of nesting, no examples."""
    if isinstance(value, float):
        return f"{value:.4g}"
    if isinstance(value, dict):
        return ", ".join(f"{k} {_figure_text(v)}" for k, v in value.items()
                         if k != "examples" and not isinstance(v, (dict, list)))
    if isinstance(value, list):
        return f"{len(value)} entries (see models.lock)"
    return str(value)


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
        ]):
            f = opt(f)
        return format_options(("text", "json"))(f)
    return wrap


def _print_figures(res: dict, targets: dict[str, str | None], digits: int) -> None:
    for f, path in targets.items():
        _write(json.dumps(res, indent=2) if f == "json" else
               "\n".join(f"{k}: {v:.{digits}f}" if isinstance(v, float) else f"{k}: {v}"
                          for k, v in res.items() if k != "examples"), path)


@models_eval.command("qa")
@_eval_options("SQuAD JSON (v1.1/v2.0) or JSONL records.", "questions")
@click.option("--heldout-seed", type=int,
              help="Evaluate the held-out titles (with constructed unanswerables) of a training file.")
def eval_qa_cmd(data, limit, heldout_seed, model_dir, fmt, as_json, out) -> None:
    """Exact match and F1 by the official SQuAD v1.1 rules (+ no-answer figures)."""
    targets = report_targets(fmt, as_json, out, ("text", "json"))
    from rich.progress import Progress

    from qacheck.evaluate import eval_qa
    from qacheck.models.qa import QAModel

    qa = QAModel(Path(model_dir)) if model_dir else QAModel()
    with Progress(console=err, transient=True) as prog:
        task = prog.add_task("answering", total=None)
        res = eval_qa(Path(data), limit, qa, heldout_seed,
                      progress=lambda d, t: prog.update(task, completed=d, total=t))
    _print_figures(res, targets, 2)


@models_eval.command("qg")
@_eval_options("SQuAD JSON (v1.1/v2.0) or JSONL records.", "answers")
def eval_qg_cmd(data, limit, model_dir, fmt, as_json, out) -> None:
    """Round-trip answerability, BLEU-4 and ROUGE-L of drafted questions."""
    targets = report_targets(fmt, as_json, out, ("text", "json"))
    from qacheck.evaluate import eval_qg
    from qacheck.models.qg import QGModel

    res = eval_qg(Path(data), limit, qg=QGModel(Path(model_dir)) if model_dir else None)
    _print_figures(res, targets, 3)


@models_eval.command("nli")
@_eval_options("One JSON Lines file of entailment pairs (premise, hypothesis, label).", "pairs")
@click.option("--heldout", is_flag=True,
              help="Only the pairs whose premise the trainer held out.")
def eval_nli_cmd(data, limit, heldout, model_dir, fmt, as_json, out) -> None:
    """Accuracy, balanced accuracy and per-class recall of the entailment reader."""
    targets = report_targets(fmt, as_json, out, ("text", "json"))
    from qacheck.evaluate import eval_nli
    from qacheck.models.nli import NLIModel

    res = eval_nli(Path(data), limit, NLIModel(Path(model_dir)) if model_dir else None, heldout)
    _print_figures(res, targets, 3)


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
        click.option("--seed", default=13, show_default=True,
                     help="Seed of the data order, sampling and held-out split."),
        click.option("--batch-size", default=32, show_default=True, help="Examples per step."),
        click.option("--lr", type=float, required=True,
                     help="Peak learning rate (linear warm-up, then linear decay)."),
        click.option("--epochs", default=1.0, show_default=True,
                     help="Passes over the training data (fractions allowed)."),
        click.option("--max-steps", type=int, help="Stop (and end the schedule) after N steps."),
        click.option("--limit", type=int, help="Use only the first N examples (smoke runs)."),
        click.option("--checkpoint-every", default=100, show_default=True,
                     help="Steps between checkpoints (a rerun with the same OUT resumes)."),
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
@click.option("--contrast", default=0, show_default=True,
              help="How many paragraphs give minimal pairs (antonym, reversed comparison, "
                   "swapped names, negation) beside their unchanged sentence.")
@click.option("--file-cap", default=12_000, show_default=True,
              help="At most this many training pairs from one entailment file.")
def train_nli_cmd(qa_data, synthetic, contrast, file_cap, **opts) -> None:
    """Train the claim-vs-evidence reader; --data is the folder of entailment files."""
    from qacheck.train.nli import train_nli

    _train(train_nli, **opts, qa_data=qa_data, synthetic=synthetic, contrast=contrast,
           file_cap=file_cap)


def _train(trainer, data, out, seed, batch_size, lr, epochs, max_steps, limit, checkpoint_every,
           no_bf16, **extra) -> None:
    from qacheck.train.loop import LoopConfig

    cfg = LoopConfig(seed=seed, batch_size=batch_size, lr=lr, epochs=epochs, max_steps=max_steps,
                     checkpoint_every=checkpoint_every, bf16=not no_bf16)
    info = trainer(Path(data), Path(out), cfg, limit=limit, log=err.print, **extra)
    click.echo(json.dumps(info, indent=2))


if __name__ == "__main__":
    main()
