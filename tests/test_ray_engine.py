"""`qacheck run --engine ray` on a two-node Ray cluster on this machine.

The cluster is Ray's own test utility (``ray.cluster_utils.Cluster``): two
nodes of one CPU each and a small object store, bound to a loopback address.
127.0.0.2, not 127.0.0.1: Ray rewrites 127.0.0.1 to the machine's network
address when a driver joins, and the point is that nothing leaves the machine.
The driver runs as a separate process, as in a nightly job, so that it can be
killed; what it writes is compared case by case with the local engine run
with the same one thread per model set that each actor uses.
"""
from __future__ import annotations

import json
import os
import signal
import subprocess
import sys
import time
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parent.parent
PORT = ROOT / "scenarios" / "caldreth-port"
QACHECK = [sys.executable, "-m", "qacheck.cli"]
LOOPBACK = "127.0.0.2"

pytestmark = pytest.mark.slow


def test_without_ray_the_engine_says_how_to_install_it(monkeypatch):
    from click.testing import CliRunner

    from qacheck.cli import main

    monkeypatch.setitem(sys.modules, "ray", None)  # import ray now raises ImportError
    res = CliRunner().invoke(main, ["run", str(PORT), "--outputs", "writer-v1", "--engine", "ray",
                                    "--ray-address", "127.0.0.2:1"])
    assert res.exit_code == 2 and "pip install 'qacheck[ray]'" in res.output


def test_the_ray_engine_never_starts_a_cluster_unasked(monkeypatch, tmp_path):
    pytest.importorskip("ray", reason="the ray extra is not installed: pip install 'qacheck[ray]'")
    from click.testing import CliRunner

    from qacheck.cli import main

    monkeypatch.delenv("RAY_ADDRESS", raising=False)
    res = CliRunner().invoke(main, ["run", str(PORT), "--outputs", "writer-v1", "--engine", "ray",
                                    "--results", str(tmp_path / "r")])
    assert res.exit_code == 2 and "--ray-address HOST:PORT or $RAY_ADDRESS" in res.output
    assert not (tmp_path / "r" / "results.jsonl").exists()
    # an address nothing listens on is an error at once (Ray would retry for minutes)
    res = CliRunner().invoke(main, ["run", str(PORT), "--outputs", "writer-v1", "--engine", "ray",
                                    "--ray-address", f"{LOOPBACK}:9", "--results",
                                    str(tmp_path / "r")])
    assert res.exit_code == 2 and "cannot reach the Ray cluster" in res.output


@pytest.fixture(scope="module")
def cluster():
    """Head and one worker node, one CPU each; dead nodes are noticed within about 2 s."""
    pytest.importorskip("ray", reason="the ray extra is not installed: pip install 'qacheck[ray]'")
    from ray.cluster_utils import Cluster

    node = {"num_cpus": 1, "node_ip_address": LOOPBACK, "object_store_memory": 100 * 2**20}
    c = Cluster(initialize_head=True, head_node_args={
        **node, "include_dashboard": False,
        "_system_config": {"health_check_period_ms": 500, "health_check_failure_threshold": 3,
                           "health_check_initial_delay_ms": 0}})
    c.add_node(**node)
    c.wait_for_nodes()
    c.node_args = node
    yield c
    c.shutdown()


def _set(tmp_path: Path, copies: int = 3) -> Path:
    """The demo set's cases and writer-v2 outputs, each ``copies`` times under new ids: enough
    batches to stop a run halfway."""
    d = tmp_path / "set"
    (d / "outputs").mkdir(parents=True)
    (d / "set.toml").write_text((PORT / "set.toml").read_text())
    cases = [json.loads(x) for x in (PORT / "cases.jsonl").read_text().splitlines()]
    outs = [json.loads(x) for x in (PORT / "outputs" / "writer-v2.jsonl").read_text().splitlines()]
    dup = lambda rows: "".join(json.dumps({**r, "id": f"{r['id']}-{k}"}) + "\n"  # noqa: E731
                               for k in range(copies) for r in rows)
    (d / "cases.jsonl").write_text(dup(cases))
    (d / "outputs" / "writer-v2.jsonl").write_text(dup(outs))
    return d


def _driver(set_dir: Path, results: Path, *extra: str, env: dict | None = None,
            address: str | None = None) -> subprocess.Popen:
    args = [*QACHECK, "run", str(set_dir), "--outputs", "writer-v2", "--results", str(results),
            "--no-cache", "--batch-size", "1"]
    if address:
        args += ["--engine", "ray", "--ray-address", address]
    return subprocess.Popen([*args, *extra], env={**os.environ, **(env or {})},
                            stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True)


def _rows(results: Path) -> list[tuple[str, float, str]]:
    """(id, score, status) of every line, sorted by id: duplicates would show."""
    return sorted((r["id"], r["score"], r["status"]) for r in
                  map(json.loads, (results / "results.jsonl").read_text().splitlines()))


def _lines(results: Path) -> int:
    path = results / "results.jsonl"
    return len(path.read_text().splitlines()) if path.exists() else 0


def _wait_for(results: Path, n: int, proc: subprocess.Popen, timeout: float = 300) -> None:
    end = time.time() + timeout
    while _lines(results) < n:
        assert proc.poll() is None, proc.communicate()
        assert time.time() < end, "the run wrote nothing"
        time.sleep(0.05)


@pytest.fixture(scope="module")
def local_reference(tmp_path_factory):
    """The set scored by the local engine with one thread, as each actor scores."""
    tmp = tmp_path_factory.mktemp("local")
    set_dir = _set(tmp)
    proc = _driver(set_dir, tmp / "r", env={"OMP_NUM_THREADS": "1"})
    out, errs = proc.communicate(timeout=900)
    assert proc.returncode == 1, errs  # writer-v2 has failing cases
    return set_dir, _rows(tmp / "r")


def test_ray_engine_results_equal_the_local_engine_with_every_report(cluster, local_reference,
                                                                     tmp_path):
    set_dir, reference = local_reference
    proc = _driver(set_dir, tmp_path / "r", address=cluster.address)
    out, errs = proc.communicate(timeout=900)
    assert proc.returncode == 1, errs
    assert _rows(tmp_path / "r") == reference
    for name in ("summary.json", "summary.md", "junit.xml", "report.html"):
        assert (tmp_path / "r" / name).stat().st_size > 0
    assert "cases that did not pass" in out


def test_an_actor_killed_mid_run_costs_a_resubmitted_batch_not_a_case(cluster, local_reference,
                                                                      tmp_path):
    set_dir, reference = local_reference
    proc = _driver(set_dir, tmp_path / "r", address=cluster.address)
    _wait_for(tmp_path / "r", 3, proc)
    end = time.time() + 60
    while True:  # an actor busy scoring holds batches: its process title says so
        busy = [line.split()[0] for line in subprocess.run(
            ["pgrep", "-af", "ray::Reader.score"], capture_output=True, text=True).stdout.splitlines()]
        if busy or time.time() > end:
            break
        time.sleep(0.02)
    assert busy, "no actor was scoring"
    written = _lines(tmp_path / "r")
    os.kill(int(busy[0]), signal.SIGKILL)
    out, errs = proc.communicate(timeout=900)
    assert proc.returncode == 1, errs
    assert written < len(reference) and "sent again" in errs
    assert _rows(tmp_path / "r") == reference


def test_a_node_removed_mid_run_loses_nothing(cluster, local_reference, tmp_path):
    set_dir, reference = local_reference
    worker = next(n for n in cluster.list_all_nodes() if n is not cluster.head_node)
    proc = _driver(set_dir, tmp_path / "r", address=cluster.address)
    try:
        _wait_for(tmp_path / "r", 3, proc)
        written = _lines(tmp_path / "r")
        cluster.remove_node(worker, allow_graceful=False)
        proc.communicate(timeout=900)
        assert written < len(reference)  # the node went while cases were left
        assert proc.returncode == 1
        assert _rows(tmp_path / "r") == reference
    finally:
        if worker not in cluster.list_all_nodes():
            cluster.add_node(**cluster.node_args)
            cluster.wait_for_nodes()


def test_a_killed_driver_resumes_on_rerun(cluster, local_reference, tmp_path):
    set_dir, reference = local_reference
    proc = _driver(set_dir, tmp_path / "r", address=cluster.address)
    _wait_for(tmp_path / "r", 3, proc)
    proc.kill()
    proc.communicate()
    kept = _lines(tmp_path / "r")
    assert 3 <= kept < len(reference)
    again = _driver(set_dir, tmp_path / "r", address=cluster.address)
    again.communicate(timeout=900)
    assert again.returncode == 1
    assert _rows(tmp_path / "r") == reference


def test_a_signature_mismatch_between_driver_and_actors_is_refused(cluster, tmp_path):
    from qacheck.models.runtime import cpu_has_bf16

    # the nodes choose their precision from the CPU; the driver is told the other one
    other = "fp32" if cpu_has_bf16() else "bf16"
    proc = _driver(PORT, tmp_path / "r", address=cluster.address,
                   env={"QACHECK_PRECISION": other})
    out, errs = proc.communicate(timeout=600)
    assert proc.returncode == 2, errs
    assert "every node needs the same qacheck" in errs and "(node " in errs
    assert _lines(tmp_path / "r") == 0
