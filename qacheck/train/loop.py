"""A small, resumable training loop shared by the QA and QG trainers.

Why not ``transformers.Trainer``: on a 2-core CPU we want exact control over
bf16 autocast, length-bucketed batches (padding is the dominant cost), a
time-stable checkpoint every few minutes and a plain JSON-lines log that a
background run can be followed with ``tail -f``.
"""
from __future__ import annotations

import json
import math
import os
import random
import time
from collections.abc import Callable, Sequence
from dataclasses import asdict, dataclass, field
from pathlib import Path
from typing import Any

import torch


@dataclass
class LoopConfig:
    """Everything that decides a training run; written beside its checkpoints."""

    seed: int = 13
    batch_size: int = 32
    lr: float = 1e-4
    weight_decay: float = 0.01
    warmup_share: float = 0.06
    epochs: float = 1.0
    max_steps: int | None = None
    checkpoint_every: int = 100
    log_every: int = 10
    bf16: bool = True
    threads: int | None = None
    extra: dict[str, Any] = field(default_factory=dict)


def bucketed_batches(lengths: Sequence[int], batch_size: int, seed: int, epochs: float) -> list[list[int]]:
    """Batches of similar length, in a shuffled order; deterministic for a seed.

    Examples are shuffled, cut into chunks of 50 batches, sorted by length
    inside each chunk and batched, and the batches are shuffled again.  That
    keeps padding small while the data order stays random.
    """
    rng = random.Random(seed)
    n = len(lengths)
    batches: list[list[int]] = []
    full_epochs = max(1, math.ceil(epochs))
    for ep in range(full_epochs):
        idx = list(range(n))
        rng.shuffle(idx)
        if ep == full_epochs - 1 and epochs < full_epochs:
            idx = idx[: int(n * (epochs - ep))]
        chunk = batch_size * 50
        epoch_batches = []
        for c in range(0, len(idx), chunk):
            part = sorted(idx[c:c + chunk], key=lambda i: lengths[i])
            epoch_batches += [part[b:b + batch_size] for b in range(0, len(part), batch_size)]
        rng.shuffle(epoch_batches)
        batches += epoch_batches
    return batches


def pad_rows(rows: Sequence[dict[str, Any]], pad_id: int) -> dict[str, torch.Tensor]:
    """Token ids, token types and attention mask of a batch, padded to its longest row
    (rounded up to a multiple of 8 for the bf16 kernels)."""
    width = (max(len(r["input_ids"]) for r in rows) + 7) // 8 * 8
    ids = torch.full((len(rows), width), pad_id, dtype=torch.long)
    tt = torch.zeros((len(rows), width), dtype=torch.long)
    mask = torch.zeros((len(rows), width), dtype=torch.long)
    for r, row in enumerate(rows):
        n = len(row["input_ids"])
        ids[r, :n] = torch.tensor(row["input_ids"])
        tt[r, :n] = torch.tensor(row["token_type_ids"])
        mask[r, :n] = 1
    return {"input_ids": ids, "token_type_ids": tt, "attention_mask": mask}


def _log(path: Path, record: dict[str, Any]) -> None:
    with open(path, "a", encoding="utf-8") as fh:
        fh.write(json.dumps(record) + "\n")


def train_loop(
    model: torch.nn.Module,
    n_examples: int,
    lengths: Sequence[int],
    collate: Callable[[list[int]], dict[str, torch.Tensor]],
    out_dir: Path,
    cfg: LoopConfig,
    progress: Callable[[int, int, float], None] | None = None,
) -> dict[str, Any]:
    """Train ``model`` (whose forward returns ``.loss``) and return a run summary.

    Resumes from ``out_dir/checkpoint.pt`` when present: model, optimiser,
    scheduler and step are restored and the same batch order is replayed
    from the next step, so an interrupted run ends where an uninterrupted
    one would.
    """
    if cfg.threads:
        torch.set_num_threads(cfg.threads)
    torch.manual_seed(cfg.seed)
    out_dir.mkdir(parents=True, exist_ok=True)
    log_path = out_dir / "train.log"
    batches = bucketed_batches(lengths, cfg.batch_size, cfg.seed, cfg.epochs)
    total = min(len(batches), cfg.max_steps) if cfg.max_steps else len(batches)
    no_decay = ("bias", "LayerNorm.weight", "layer_norm.weight", "norm.weight")
    params = [
        {"params": [p for n, p in model.named_parameters() if not any(k in n for k in no_decay)],
         "weight_decay": cfg.weight_decay},
        {"params": [p for n, p in model.named_parameters() if any(k in n for k in no_decay)],
         "weight_decay": 0.0},
    ]
    opt = torch.optim.AdamW(params, lr=cfg.lr)
    warm = max(1, int(total * cfg.warmup_share))

    def lr_factor(step: int) -> float:
        if step < warm:
            return (step + 1) / warm
        return max(0.0, (total - step) / max(1, total - warm))

    sched = torch.optim.lr_scheduler.LambdaLR(opt, lr_factor)
    start_step = 0
    ckpt = out_dir / "checkpoint.pt"
    if ckpt.exists():
        state = torch.load(ckpt, map_location="cpu", weights_only=False)
        model.load_state_dict(state["model"])
        opt.load_state_dict(state["optimizer"])
        sched.load_state_dict(state["scheduler"])
        start_step = state["step"]
        torch.set_rng_state(state["torch_rng"])
        _log(log_path, {"event": "resume", "step": start_step})
    else:
        _log(log_path, {"event": "start", "total_steps": total, "config": asdict(cfg)})
    model.train()
    t0, seen_loss, seen = time.time(), 0.0, 0
    for step in range(start_step, total):
        batch = collate(batches[step])
        with torch.autocast("cpu", dtype=torch.bfloat16, enabled=cfg.bf16):
            loss = model(**batch).loss
        loss.backward()
        torch.nn.utils.clip_grad_norm_(model.parameters(), 1.0)
        opt.step()
        sched.step()
        opt.zero_grad(set_to_none=True)
        seen_loss += float(loss.detach())
        seen += 1
        done = step + 1
        if done % cfg.log_every == 0 or done == total:
            rate = (time.time() - t0) / seen
            _log(log_path, {"step": done, "total": total, "loss": round(seen_loss / seen, 4),
                            "lr": sched.get_last_lr()[0], "s_per_step": round(rate, 3),
                            "eta_min": round(rate * (total - done) / 60, 1)})
            if progress:
                progress(done, total, seen_loss / seen)
            seen_loss, seen, t0 = 0.0, 0, time.time()
        if done % cfg.checkpoint_every == 0 and done < total:
            tmp = ckpt.with_suffix(".tmp")
            torch.save({"model": model.state_dict(), "optimizer": opt.state_dict(),
                        "scheduler": sched.state_dict(), "step": done,
                        "torch_rng": torch.get_rng_state()}, tmp)
            os.replace(tmp, ckpt)
    model.eval()
    _log(log_path, {"event": "end", "steps": total})
    return {"steps": total, "examples_seen": sum(len(b) for b in batches[:total])}


def export_model(model: torch.nn.Module, tokenizer, out_dir: Path, record: dict[str, Any],
                 cfg: LoopConfig, data: Path, summary: dict[str, Any]) -> dict[str, Any]:
    """Write ``out_dir/model``: bf16 safetensors, tokenizer, and ``training.json``.

    ``training.json`` records what reproduces the run (command, data sha256,
    seed, steps, schedule) plus the trainer's own ``record``; ``qacheck models
    lock`` copies it into models.lock.
    """
    import shutil
    import sys

    from qacheck.models.lock import sha256_file

    export = out_dir / "model"
    if export.exists():
        shutil.rmtree(export)
    model.to(torch.bfloat16).save_pretrained(export, safe_serialization=True)
    tokenizer.save_pretrained(export)
    info = {"command": " ".join(sys.argv), "data": str(data), "data_sha256": sha256_file(data),
            "seed": cfg.seed, "steps": summary["steps"], "examples_seen": summary["examples_seen"],
            "batch_size": cfg.batch_size, "lr": cfg.lr, "epochs": cfg.epochs, "bf16": cfg.bf16,
            **record}
    (export / "training.json").write_text(json.dumps(info, indent=2))
    return info
