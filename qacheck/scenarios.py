"""Scenario sets: a manifest, the cases, and generator outputs kept apart from the cases.

Layout of a set folder::

    set.toml          name, description, tags, [thresholds], [gate]
    cases.jsonl       {"id", "source", "reference"?, "output"?, "expect"?, "tags"?}
    outputs/NAME.jsonl  {"id", "output"}: one file per generator version

Problems in cases or outputs never stop a run: each is recorded with its
file, line and field, and the case it touches is reported as an error while
every other case is scored.  Only an unreadable manifest stops a run early.
"""
from __future__ import annotations

import json
import tomllib
from collections.abc import Iterator
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

from qacheck.errors import InputError

EXPECT_KEYS = {"label", "min_score", "max_score"}
#: what a set.toml may hold: a top-level key -> the type it must have; tables list their keys
MANIFEST_KEYS: dict[str, type] = {"name": str, "description": str, "tags": list,
                                  "thresholds": dict, "gate": dict}
GATE_KEYS = {"tolerance"}


@dataclass
class Problem:
    """One bad line or field, kept so the report can name it."""

    path: str
    line: int | None
    field: str | None
    message: str
    case_id: str | None = None

    def __str__(self) -> str:
        where = self.path + (f":{self.line}" if self.line else "")
        return f"{where}: " + (f"field '{self.field}': " if self.field else "") + self.message


@dataclass
class Case:
    id: str
    source: str
    output: str | None = None
    reference: str | None = None
    expect: dict[str, Any] = field(default_factory=dict)
    tags: list[str] = field(default_factory=list)
    error: str | None = None  # set when the case cannot be scored, with the reason


@dataclass
class ScenarioSet:
    name: str
    description: str
    folder: Path
    cases: list[Case]
    thresholds: dict[str, float]
    gate: dict[str, float]
    tags: list[str]
    problems: list[Problem]
    outputs_name: str


def _read_jsonl(path: Path,
                problems: list[Problem]) -> Iterator[tuple[int, dict[str, Any] | None]]:
    """(line number, object) of each non-blank line, read one line at a time; a line that is not
    a JSON object gives None and its problem.  Lines end at newline bytes only, as JSON Lines
    defines them."""
    try:
        fh = open(path, "rb")
    except OSError as exc:
        raise InputError(f"cannot read: {exc.strerror}", path=path) from exc
    with fh:
        for lineno, line in enumerate(fh, 1):
            if not line.strip():
                continue
            try:
                rec = json.loads(line.decode("utf-8"))
            except UnicodeDecodeError:
                problems.append(Problem(str(path), lineno, None, "line is not UTF-8"))
                rec = None
            except json.JSONDecodeError as exc:
                problems.append(Problem(str(path), lineno, None, f"not valid JSON ({exc.msg})"))
                rec = None
            if rec is not None and not isinstance(rec, dict):
                problems.append(Problem(str(path), lineno, None, "a line must hold a JSON object"))
                rec = None
            yield lineno, rec


def _text_field(rec: dict, key: str, path: Path, lineno: int, problems: list[Problem],
                case_id: str | None, required: bool) -> str | None:
    value = rec.get(key)
    if value is None:
        if required:
            problems.append(Problem(str(path), lineno, key, "missing", case_id))
        return None
    if not isinstance(value, str):
        problems.append(Problem(str(path), lineno, key, "must be a string", case_id))
        return None
    if "\x00" in value:
        problems.append(Problem(str(path), lineno, key, "contains NUL bytes", case_id))
        return None
    if not value.strip():
        problems.append(Problem(str(path), lineno, key, "empty text", case_id))
        return None
    return value


def _line_of(text: str, key: str, table: str | None = None) -> int | None:
    """The line of ``key`` (inside ``[table]`` when given) in a TOML text, for error messages."""
    import re

    lines = text.splitlines()
    start = 0
    if table is not None:
        start = next((i + 1 for i, ln in enumerate(lines)
                      if re.match(rf"\s*\[\s*{re.escape(table)}\s*\]", ln)), 0)
    for i in range(start, len(lines)):
        if re.match(rf"\s*\[?\s*{re.escape(key)}\s*[\]=]", lines[i]):
            return i + 1
    return None


def _check_manifest(manifest: dict[str, Any], path: Path) -> None:
    """Refuse unknown tables and keys and wrongly typed values, naming the file and line, so a
    typo ("[gaet]", "tolerence") is an error rather than a setting silently ignored."""
    text = path.read_text(encoding="utf-8")
    if "name" not in manifest:
        raise InputError("missing", path=path, field="name")
    for key, value in manifest.items():
        if key not in MANIFEST_KEYS:
            raise InputError(f"unknown key or table (known: {', '.join(sorted(MANIFEST_KEYS))})",
                             path=path, line=_line_of(text, key), field=key)
        if not isinstance(value, MANIFEST_KEYS[key]):
            raise InputError(f"must be a {MANIFEST_KEYS[key].__name__.replace('dict', 'table')}",
                             path=path, line=_line_of(text, key), field=key)
    if any(not isinstance(t, str) for t in manifest.get("tags", [])):
        raise InputError("must be a list of strings", path=path, line=_line_of(text, "tags"),
                         field="tags")
    for key, value in manifest.get("gate", {}).items():
        if key not in GATE_KEYS:
            raise InputError(f"unknown gate setting (known: {', '.join(sorted(GATE_KEYS))})",
                             path=path, line=_line_of(text, key, "gate"), field=f"gate.{key}")
        if not isinstance(value, (int, float)) or isinstance(value, bool):
            raise InputError("must be a number", path=path, line=_line_of(text, key, "gate"),
                             field=f"gate.{key}")


def load_set(folder: str | Path, outputs: str | Path | None = None) -> ScenarioSet:
    """Load a set and (optionally) one generator version's outputs file."""
    folder = Path(folder)
    manifest_path = folder / "set.toml"
    if not manifest_path.exists():
        raise InputError("scenario set has no set.toml", path=folder)
    try:
        manifest = tomllib.loads(manifest_path.read_text(encoding="utf-8"))
    except tomllib.TOMLDecodeError as exc:
        raise InputError(f"not valid TOML ({exc})", path=manifest_path) from exc
    _check_manifest(manifest, manifest_path)
    problems: list[Problem] = []
    cases_path = folder / "cases.jsonl"
    if not cases_path.exists():
        raise InputError("scenario set has no cases.jsonl", path=folder)
    cases: list[Case] = []
    seen: dict[str, int] = {}
    for lineno, rec in _read_jsonl(cases_path, problems):
        if rec is None:
            # a line that could not be read stays a case (an error case): counted and reported
            cases.append(Case(f"{cases_path.name}:{lineno}", "", error=str(problems[-1])))
            seen[cases[-1].id] = lineno
            continue
        cid = rec.get("id")
        if not isinstance(cid, str) or not cid.strip():
            problems.append(Problem(str(cases_path), lineno, "id", "missing or not a string"))
            cases.append(Case(f"{cases_path.name}:{lineno}", "", error=str(problems[-1])))
            seen[cases[-1].id] = lineno
            continue
        if cid in seen:
            problems.append(Problem(str(cases_path), lineno, "id",
                                    f"duplicate id '{cid}' (first on line {seen[cid]}); "
                                    "this line is ignored", cid))
            continue
        seen[cid] = lineno
        n_before = len(problems)
        source = _text_field(rec, "source", cases_path, lineno, problems, cid, True)
        output = _text_field(rec, "output", cases_path, lineno, problems, cid, False)
        expect = rec.get("expect") or {}
        if not isinstance(expect, dict) or set(expect) - EXPECT_KEYS:
            problems.append(Problem(str(cases_path), lineno, "expect",
                                    f"must be an object with keys from {sorted(EXPECT_KEYS)}", cid))
            expect = {}
        case = Case(cid, source or "", output, rec.get("reference"), expect,
                    list(rec.get("tags", [])))
        if len(problems) > n_before:
            case.error = str(problems[-1])
        cases.append(case)
    outputs_name = "inline"
    if outputs is not None:
        outputs_path = Path(outputs)
        if not outputs_path.exists() and (folder / "outputs" / f"{outputs}.jsonl").exists():
            outputs_path = folder / "outputs" / f"{outputs}.jsonl"
        if not outputs_path.exists():
            raise InputError(f"outputs file not found (looked for {outputs_path} and "
                             f"{folder / 'outputs' / f'{outputs}.jsonl'})", path=outputs_path)
        outputs_name = outputs_path.stem
        by_id = {c.id: c for c in cases}
        got: dict[str, int] = {}
        for lineno, rec in _read_jsonl(outputs_path, problems):
            if rec is None:
                continue
            cid = rec.get("id")
            if not isinstance(cid, str) or cid not in by_id:
                problems.append(Problem(str(outputs_path), lineno, "id",
                                        f"no case with id {cid!r} in {cases_path.name}", None))
                continue
            if cid in got:
                problems.append(Problem(str(outputs_path), lineno, "id",
                                        f"second output for '{cid}' (first on line {got[cid]}); "
                                        "ignored", cid))
                continue
            got[cid] = lineno
            text = _text_field(rec, "output", outputs_path, lineno, problems, cid, True)
            case = by_id[cid]
            case.output = text
            if text is None and case.error is None:
                case.error = str(problems[-1])
        for c in cases:
            if c.id not in got and c.error is None:
                c.output = None
                c.error = f"{outputs_path}: no output for this case"
    cases.sort(key=lambda c: seen.get(c.id, 0))
    for c in cases:
        if c.error is None and not c.output:
            c.error = f"{cases_path}:{seen[c.id]}: field 'output': missing (no outputs file given)"
    thresholds = manifest.get("thresholds", {})
    gate = manifest.get("gate", {})
    return ScenarioSet(manifest["name"], manifest.get("description", ""), folder, cases,
                       thresholds, gate, list(manifest.get("tags", [])), problems, outputs_name)
