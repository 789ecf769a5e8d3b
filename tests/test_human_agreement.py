"""Agreement with human judgements on published data (slow: runs the models on 60 records).

Data: ../shared/data/faithfulness (XSumFaith, Maynez et al. 2020; CLIFF, Cao and
Wang 2021; SummEdits, Laban et al. 2023).  The floor is a stated minimum below
the figures measured on larger samples (reported in README and the resolving
note); the ROUGE-L precision baseline is computed in the same run.
"""
from __future__ import annotations

import json

import pytest
from click.testing import CliRunner

from conftest import shared_file
from qacheck.human_agreement import Judged, evaluate_file, read_judgements, sample
from qacheck.cli import main
from qacheck.errors import InputError

AUC_FLOOR = 0.60


@pytest.fixture(scope="module")
def fixed_sample():
    files = [shared_file("faithfulness", f) for f in ("xsumfaith.jsonl", "cliff.jsonl",
                                                      "summedits.jsonl")]
    res = CliRunner().invoke(main, ["agreement", *map(str, files), "--limit", "20", "--json",
                                    "--no-cosine"])
    assert res.exit_code == 0, res.output
    return json.loads(res.output)


@pytest.mark.slow
def test_harness_on_fixed_sample_beats_floor(fixed_sample):
    d = fixed_sample
    assert d["overall"]["roc_auc"] >= AUC_FLOOR, d
    assert d["files"]["xsumfaith"]["sentence_recall"] is not None


@pytest.mark.slow
def test_harness_beats_rouge_baseline(fixed_sample):
    """The issue's bar: a figure that does not beat the ROUGE-L precision baseline is a failure.
    (The sentence model was fitted on 300-record samples of these files, so this sample overlaps
    its fitting data; the held-out-file figures are in README.)"""
    files = fixed_sample["files"].values()
    ours = sum(f["roc_auc"] for f in files) / 3
    rouge = sum(f["baselines"]["rougeL_precision"]["roc_auc"] for f in files) / 3
    assert ours > rouge, (ours, rouge)


def test_sample_is_fixed_and_keeps_both_classes(tmp_path):
    recs = [Judged(str(i), "x", "s", "o", i % 10 == 0, ()) for i in range(100)]
    a, b = sample(recs, 30, seed=1), sample(recs, 30, seed=1)
    assert [r.id for r in a] == [r.id for r in b]
    assert sum(r.consistent for r in a) == 10  # the rare class takes a third


def test_sentence_figures_from_spans():
    rec = Judged("1", "x", "src", "A is B. C is D.", False,
                 ({"start": 8, "end": 15, "text": "C is D.", "type": "extrinsic", "votes": 2},))
    res = {"score": 0.4, "label": "inconsistent", "sentences": [
        {"start": 0, "end": 7, "label": "supported"},
        {"start": 8, "end": 15, "label": "unverifiable"}]}
    fig = evaluate_file([rec], [res], {"b": [0.3]}, 0.5)
    assert fig["sentence_precision"] == 1.0 and fig["sentence_recall"] == 1.0
    assert fig["type_match"] == 1.0


def test_bad_judgement_line_is_named(tmp_path):
    p = tmp_path / "j.jsonl"
    p.write_text('{"source": "a", "output": "b", "consistent": true}\n{"source": "a"}\n')
    with pytest.raises(InputError, match=r"j.jsonl:2.*output"):
        read_judgements(p)
