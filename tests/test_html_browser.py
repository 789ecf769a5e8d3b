"""The HTML reports in a real headless browser (Debian's chromium, installed by .ci/run).

Checks: the page loads with no console errors, a screenshot is not blank, and
text from the inputs that looks like markup (a <script> in a source) stays
text and runs nothing.
"""
from __future__ import annotations

import json
import shutil
import subprocess
from pathlib import Path

import pytest
from click.testing import CliRunner

from qacheck.cli import main

CHROMIUM = shutil.which("chromium") or shutil.which("chromium-browser")
FLAGS = ["--headless", "--no-sandbox", "--disable-gpu", "--disable-quic", "--no-first-run",
         "--disable-background-networking", "--disable-component-update", "--disable-sync",
         "--enable-logging=stderr", "--v=0"]

pytestmark = pytest.mark.skipif(CHROMIUM is None, reason="chromium is not installed "
                                "(.ci/run installs Debian's chromium)")

INJECTION = '<script>document.title="PWNED";document.body.innerHTML="PWNED"</script>'


def _browser(tmp_path: Path, page: Path, *extra: str) -> subprocess.CompletedProcess:
    return subprocess.run([CHROMIUM, *FLAGS, f"--user-data-dir={tmp_path / 'profile'}", *extra,
                           page.as_uri()], capture_output=True, text=True, timeout=120)


def _report(tmp_path: Path) -> Path:
    d = tmp_path / "inj"
    (d / "outputs").mkdir(parents=True)
    (d / "set.toml").write_text('name = "injection"\n')
    src = f"The Felwick library opened in 1962. {INJECTION} It holds 40,000 books."
    (d / "cases.jsonl").write_text(json.dumps({"id": "inj<b>1</b>", "source": src}) + "\n")
    (d / "outputs" / "v1.jsonl").write_text(json.dumps(
        {"id": "inj<b>1</b>", "output": f"The Felwick library opened in 1971. {INJECTION}"}) + "\n")
    CliRunner().invoke(main, ["run", str(d), "--outputs", "v1", "--results", str(tmp_path / "res")])
    page = tmp_path / "res" / "report.html"
    assert page.exists()
    return page


def _pages(tmp_path: Path) -> dict[str, Path]:
    """The three kinds of page: a run report, a pair report and a version comparison."""
    run = _report(tmp_path)
    pair = tmp_path / "pair.html"
    res = CliRunner().invoke(main, ["score", "--source-text", f"The Felwick library opened in "
                                    f"1962. {INJECTION}", "--output-text",
                                    "The Felwick library opened in 1971.", "--format", "html",
                                    "--out", str(pair)])
    assert res.exit_code == 0, res.output
    compare = tmp_path / "compare.html"
    res = CliRunner().invoke(main, ["compare", str(tmp_path / "res"), str(tmp_path / "res"),
                                    "--format", "html", "--out", str(compare),
                                    "--resamples", "200"])
    assert res.exit_code == 0, res.output
    return {"run": run, "pair": pair, "compare": compare}


def test_every_report_loads_without_console_errors_and_renders(tmp_path):
    from PIL import Image

    for name, page in _pages(tmp_path).items():
        shot = tmp_path / f"{name}.png"
        res = _browser(tmp_path, page, f"--screenshot={shot}", "--window-size=1200,900")
        assert shot.exists(), (name, res.stderr[-2000:])
        console = [line for line in res.stderr.splitlines() if "CONSOLE" in line]
        assert not console, (name, console)  # a script error would show here
        img = Image.open(shot).convert("L")
        lo, hi = img.getextrema()
        assert hi - lo > 100, f"{name}: screenshot is blank"
        # most of the page is white, but text and marks are there too
        assert len(img.getcolors(256)) > 20, name


def test_markup_from_inputs_stays_text_on_every_page(tmp_path):
    own_scripts = {"run": 1, "pair": 0, "compare": 0}  # the run page sorts and filters its table
    doms = {name: _browser(tmp_path, page, "--dump-dom").stdout
            for name, page in _pages(tmp_path).items()}
    for name, dom in doms.items():
        assert "PWNED" not in dom.split("<title>")[1].split("</title>")[0], name
        assert dom.lower().count("<script") == own_scripts[name], name
        # the injected script is shown as text (the comparison of a run with itself lists no
        # sentence, but names the case, markup and all, beside its point)
        assert ("inj&lt;b&gt;1&lt;/b&gt;" if name == "compare" else "&lt;script&gt;") in dom, name
    assert "inj&lt;b&gt;1&lt;/b&gt;" in doms["run"]
    assert 'document.getElementById("cases")' in doms["run"]
