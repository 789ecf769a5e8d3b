"""Bad input gets one clear line naming file, line and field, and exit 2; text is made inert.

Markdown escaping is checked by rendering with markdown-it-py, a CommonMark
implementation (the reference for how a CI page will render the summary).
"""
from __future__ import annotations

import shutil
from pathlib import Path

import pytest
from click.testing import CliRunner

from qacheck.cli import main
from qacheck.errors import InputError
from qacheck.scenarios import load_set

PORT = Path(__file__).resolve().parent.parent / "scenarios" / "caldreth-port"


def _set(tmp_path: Path, manifest: str) -> Path:
    d = tmp_path / "set"
    shutil.copytree(PORT, d)
    (d / "set.toml").write_text(manifest)
    return d


@pytest.mark.parametrize("manifest,where,field", [
    ('name = "x"\n[gaet]\ntolerance = 0.03\n', ":2", "gaet"),
    ('name = "x"\n[gate]\ntolerence = 0.03\n', ":3", "gate.tolerence"),
    ('name = "x"\ntagz = ["a"]\n', ":2", "tagz"),
    ('name = "x"\n[gate]\ntolerance = "high"\n', ":3", "gate.tolerance"),
    ('name = "x"\ntags = "demo"\n', ":2", "tags"),
])
def test_every_typo_in_set_toml_is_an_error_naming_file_line_and_field(tmp_path, manifest, where,
                                                                        field):
    d = _set(tmp_path, manifest)
    with pytest.raises(InputError) as err:
        load_set(d)
    assert f"set.toml{where}" in str(err.value) and f"'{field}'" in str(err.value)


def test_a_malformed_case_line_stays_a_counted_error_case(tmp_path):
    d = _set(tmp_path, 'name = "x"\n')
    lines = (d / "cases.jsonl").read_text().splitlines()
    lines.insert(1, '{"id": "broken", "source": ')
    (d / "cases.jsonl").write_text("\n".join(lines) + "\n")
    s = load_set(d, "writer-v1")
    bad = [c for c in s.cases if c.error and "not valid JSON" in c.error]
    assert len(bad) == 1 and bad[0].id == "cases.jsonl:2"
    assert len(s.cases) == len(lines)  # every line is a case, the broken one too
    assert [c.id for c in s.cases].index("cases.jsonl:2") == 1  # in file order


def test_nul_bytes_are_an_input_error(tmp_path):
    src = tmp_path / "source.txt"
    src.write_bytes(b"The ferry leaves at 9 am.\n\x00\x00binary")
    out = tmp_path / "out.txt"
    out.write_text("The ferry leaves at 9 am.")
    res = CliRunner().invoke(main, ["score", str(src), str(out)])
    assert res.exit_code == 2 and "NUL" in res.output and "source.txt:2" in res.output


def test_a_missing_output_folder_is_refused_before_scoring(tmp_path):
    res = CliRunner().invoke(main, ["score", "--source-text", "A ferry.", "--output-text",
                                    "A ferry.", "--format", "html", "--out",
                                    str(tmp_path / "missing" / "x.html")])
    assert res.exit_code == 2 and "missing" in res.output and "Traceback" not in res.output


def test_source_given_twice_is_refused(tmp_path):
    src = tmp_path / "s.txt"
    src.write_text("A ferry.")
    res = CliRunner().invoke(main, ["score", str(src), str(src), "--source-text", "Other."])
    assert res.exit_code == 2 and "--source-text" in res.output


def test_outputs_not_found_says_where_it_looked(tmp_path):
    with pytest.raises(InputError) as err:
        load_set(PORT, "writer-v9")
    assert "writer-v9" in str(err.value) and "outputs" in str(err.value)


def test_markdown_summary_keeps_input_text_inert():
    from markdown_it import MarkdownIt

    from qacheck.reports.markdown import render_run

    evil = '<script>alert(1)</script> <img src=x onerror="alert(2)"> **loud** [link](javascript:x)'
    result = {"sentences": [{"text": evil, "label": "contradicted", "score": 0.1,
                             "questions": [], "reason": {"rule": "value", "text": evil,
                                                         "suggestion": evil, "cut": 0.4}}]}
    summary = {"set": evil, "outputs": "v1", "status": {"fail": 1}, "cases": 1,
               "mean_score": 0.1, "problems": [evil],
               "signature": {"text": "signature 0123", "id": "0123"}}
    records = [{"id": evil, "status": "fail", "score": 0.1, "reasons": [evil], "result": result}]
    page = MarkdownIt("commonmark").enable("table").render(render_run(summary, records, [evil]))
    assert "<script" not in page and "<img" not in page and "<strong>loud" not in page
    assert 'href="javascript' not in page
    assert "&lt;script&gt;" in page  # shown as text
