"""One grammar for every command, and the terminal view of a run."""
from __future__ import annotations

import json
from pathlib import Path

from click.testing import CliRunner

from qacheck.cli import main

ROOT = Path(__file__).resolve().parent.parent
PORT = ROOT / "scenarios" / "caldreth-port"
SRC = "The Harl ferry leaves Caldreth at 9 am. It carries 40 cars."
OUT = "The Harl ferry leaves Caldreth at 10 am."


def test_several_formats_come_from_one_scoring(tmp_path, monkeypatch):
    from qacheck.pipeline import Checker

    calls = []
    real = Checker.check_many

    def counting(self, pairs):
        calls.append(len(pairs))
        return real(self, pairs)

    monkeypatch.setattr(Checker, "check_many", counting)
    res = CliRunner().invoke(main, ["score", "--source-text", SRC, "--output-text", OUT,
                                    "--format", "text,json,html", "--out",
                                    str(tmp_path / "report.html")])
    assert res.exit_code == 0, res.output
    assert calls == [1]
    data = json.loads((tmp_path / "report.json").read_text())
    assert data["label"] == "inconsistent"
    assert "<html" in (tmp_path / "report.html").read_text()
    text = (tmp_path / "report.txt").read_text()
    assert "contradicted by value conflict" in text and data["signature"]["id"] in text
    # --json is the same as --format json, and served from the cache now
    one = CliRunner().invoke(main, ["score", "--source-text", SRC, "--output-text", OUT, "--json"])
    assert json.loads(one.output) == data and calls == [1]


def test_format_errors_are_usage_errors_before_any_work(tmp_path):
    res = CliRunner().invoke(main, ["score", "--source-text", SRC, "--output-text", OUT,
                                    "--format", "json,pdf"])
    assert res.exit_code == 2 and "pdf is not one of text, json, html" in res.output
    res = CliRunner().invoke(main, ["score", "--source-text", SRC, "--output-text", OUT,
                                    "--format", "json,html"])
    assert res.exit_code == 2 and "several formats need --out" in res.output


def test_run_prints_a_terminal_view_not_markdown(tmp_path):
    res = CliRunner().invoke(main, ["run", str(PORT), "--outputs", "writer-v2", "--results",
                                    str(tmp_path / "r")])
    assert res.exit_code == 1
    out = res.output
    assert "##" not in out and "**" not in out and "<sub>" not in out and "<details>" not in out
    assert "gate: no baseline given" in out
    listed = out.split("cases that did not pass")[1]
    # what failed is listed with the rule that flagged each sentence
    assert "FAIL" in listed and "by value conflict" in listed and "fix: source says" in listed
    scores = [float(line.split("P(faithful)")[1]) for line in listed.splitlines()
              if line.startswith("FAIL")]
    assert scores == sorted(scores)  # worst first


def test_every_option_of_every_command_has_help_text():
    import click

    missing = []

    def walk(cmd, path):
        if isinstance(cmd, click.Group):
            for name, sub in cmd.commands.items():
                walk(sub, path + [name])
            return
        missing.extend(f"{' '.join(path)} {p.opts[0]}" for p in cmd.params
                       if isinstance(p, click.Option) and not p.help and p.name != "help")

    walk(main, ["qacheck"])
    assert not missing, missing


def test_the_precision_mode_can_be_forced_and_a_bad_one_is_one_error_line(monkeypatch, tmp_path):
    """A cluster of mixed CPUs agrees only when every node runs one mode: QACHECK_PRECISION."""
    from qacheck.models.runtime import cpu_has_bf16, use_bf16

    monkeypatch.setenv("QACHECK_PRECISION", "fp32")
    assert use_bf16() is False
    monkeypatch.setenv("QACHECK_PRECISION", "BF16")
    assert use_bf16() is True
    monkeypatch.setenv("QACHECK_PRECISION", "auto")
    assert use_bf16() is cpu_has_bf16()
    monkeypatch.setenv("QACHECK_PRECISION", "fp64")
    res = CliRunner().invoke(main, ["score", "--source-text", "The quay opened in 1990.",
                                    "--output-text", "The quay opened in 1990.", "--no-cache"])
    assert res.exit_code == 2
    assert res.output.strip().splitlines() == [
        "error: $QACHECK_PRECISION must be auto, bf16 or fp32, not 'fp64'"]
