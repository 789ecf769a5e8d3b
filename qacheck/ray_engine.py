"""Scoring on an existing Ray cluster: actors hold the models, the driver does the rest.

The driver (``qacheck run --engine ray``) loads and validates the set,
resumes, answers from the cache and writes every file; it hands the pairs
left to score to Ray actors in small batches, at most ``IN_FLIGHT`` per actor.
Each actor (``actor_cpus`` CPUs and as many torch threads) builds one ``Checker`` from the qacheck installed on its node and
reports its signature first; a signature other than the driver's (another
precision mode, other model files or versions) stops the run before any
result is used.  An actor or node that dies costs the batches it held, which
go back to the queue and are scored by another actor: a case is written once
and never lost.  An error raised while scoring fails the run loudly.

Ray is imported only here, and only when this engine is chosen (the
``qacheck[ray]`` extra); qacheck never starts a cluster unless the address
says ``local``.
"""
from __future__ import annotations

import collections
import ipaddress
import os
import time
from collections.abc import Iterator
from dataclasses import dataclass, field
from typing import Any

from qacheck.config import Thresholds
from qacheck.errors import InputError, QacheckError
from qacheck.runner import IN_FLIGHT, Batch

INSTALL_HINT = "the Ray engine needs the ray extra: pip install 'qacheck[ray]'"
#: how long the driver waits for a first (or replacement) actor before giving up
START_TIMEOUT_S = 600.0


class EngineError(QacheckError):
    """The cluster could not score the set (no actor started, or scoring raised)."""


class Reader:
    """A Ray actor: one ``Checker`` for the life of the actor, scoring batches of pairs.

    It writes nothing: the driver is the only writer of the cache and the
    results, so an actor needs no shared disk.
    """

    def __init__(self, thresholds: dict[str, Any], threads: int) -> None:
        import torch

        from qacheck.pipeline import Checker

        torch.set_num_threads(threads)
        self.checker = Checker(Thresholds.from_dict(thresholds), store=None)

    def describe(self) -> dict[str, Any]:
        """Who this actor is and the signatures it scores under."""
        import socket

        import ray

        return {"signature": self.checker.signature["id"],
                "evidence": self.checker.evidence_signature["id"],
                "text": self.checker.signature["text"], "host": socket.gethostname(),
                "node": ray.get_runtime_context().get_node_id(), "pid": os.getpid()}

    def score(self, pairs: list[tuple[str, str]]) -> list[dict[str, Any]]:
        return [r.to_dict(include_texts=True) for r in self.checker.check_many(pairs)]


def connect(address: str | None) -> Any:
    """Connect to the cluster at ``address`` (or ``$RAY_ADDRESS``); the ray module on success.

    ``local`` starts a private one-machine instance for this run; no address
    at all is an error, because starting a cluster nobody asked for would
    hide a misconfigured nightly job.  An address nothing answers on fails in
    seconds.  A driver joining a cluster bound to a loopback address other than
    127.0.0.1 (a test cluster on one machine) joins with that address.
    """
    try:
        import ray
    except ImportError:
        raise InputError(INSTALL_HINT, field="--engine") from None
    address = address or os.environ.get("RAY_ADDRESS")
    if not address:
        raise InputError("--engine ray needs the cluster: --ray-address HOST:PORT or "
                         "$RAY_ADDRESS (or --ray-address local for a private one-machine "
                         "instance)", field="--ray-address")
    kwargs: dict[str, Any] = {"address": address, "log_to_driver": False}
    if address == "local":
        kwargs["include_dashboard"] = False
    elif address != "auto":  # "auto": the cluster `ray start` began on this node
        host, _, port = address.removeprefix("ray://").rpartition(":")
        _reachable(address, host, port)
        try:
            # Ray itself maps 127.0.0.1 to the node's address; other loopback addresses are kept
            if ipaddress.ip_address(host).is_loopback and host not in ("127.0.0.1", "::1"):
                kwargs["_node_ip_address"] = host
        except ValueError:
            pass
    try:
        ray.init(**kwargs)
    except (ConnectionError, ValueError, RuntimeError) as exc:
        raise InputError(f"cannot reach the Ray cluster at {address}: {exc}",
                         field="--ray-address") from None
    return ray


#: seconds to wait for the cluster's port to answer before calling the address wrong
CONNECT_TIMEOUT_S = 10.0


def _reachable(address: str, host: str, port: str) -> None:
    """Fail fast on an address nothing listens on: Ray itself retries for minutes."""
    import socket

    if not host or not port.isdigit():
        raise InputError(f"not a HOST:PORT address: {address!r}", field="--ray-address")
    try:
        socket.create_connection((host, int(port)), timeout=CONNECT_TIMEOUT_S).close()
    except OSError as exc:
        raise InputError(f"cannot reach the Ray cluster at {address}: "
                         f"{exc.strerror or exc}", field="--ray-address") from None


@dataclass
class _Slot:
    """One actor and the batches it holds."""

    actor: Any
    ready: bool = False
    info: dict[str, Any] = field(default_factory=dict)
    running: set = field(default_factory=set)


class RayEngine:
    """Scores batches on Ray actors; an engine for ``qacheck.runner.Scorer``.

    ``expected`` holds the driver's signature ids (``signature`` and
    ``evidence``); every actor must report the same.
    """

    def __init__(self, thresholds: Thresholds, expected: dict[str, str],
                 address: str | None = None, actors: int | None = None, actor_cpus: int = 1,
                 start_timeout: float = START_TIMEOUT_S) -> None:
        self.ray = connect(address)
        cpus = int(self.ray.cluster_resources().get("CPU", 0))
        self.actors = actors or max(1, cpus // actor_cpus)
        self.actor_cpus = actor_cpus
        self.thresholds, self.expected = thresholds, expected
        self.start_timeout = start_timeout
        # dead actors are replaced up to three times the actors asked for: a cluster that keeps
        # killing them is reported, not retried forever
        self.replacements_left = 3 * self.actors
        self.resubmitted = 0
        self.last_death = ""
        self.remote = self.ray.remote(num_cpus=actor_cpus, max_restarts=0)(Reader)

    def _start(self) -> tuple[_Slot, Any]:
        slot = _Slot(self.remote.remote(self.thresholds.as_dict(), self.actor_cpus))
        return slot, slot.actor.describe.remote()

    def _check(self, slot: _Slot, info: dict[str, Any]) -> None:
        for kind in ("signature", "evidence"):
            if info[kind] != self.expected[kind]:
                raise InputError(
                    f"the actor on {info['host']} (node {info['node'][:12]}) scores under "
                    f"{info['text']}, the driver under signature {self.expected[kind]}: every "
                    "node needs the same qacheck, model files, library versions and precision "
                    "(set QACHECK_PRECISION on all of them)", field="--engine")
        slot.info, slot.ready = info, True

    def results(self, batches: Iterator[Batch]) -> Iterator[tuple[int, list[dict[str, Any]]]]:
        """Yield (batch id, results) as batches finish, in any order, each batch exactly once."""
        ray = self.ray
        from ray.exceptions import RayActorError, RayTaskError

        queue: collections.deque[Batch] = collections.deque()  # batches to send again
        starting: dict[Any, _Slot] = {}
        running: dict[Any, tuple[_Slot, Batch]] = {}
        slots: list[_Slot] = []
        for _ in range(self.actors):
            slot, ref = self._start()
            slots.append(slot)
            starting[ref] = slot
        source = iter(batches)
        exhausted = False
        waiting_since = time.monotonic()
        try:
            while True:
                for slot in slots:
                    while slot.ready and len(slot.running) < IN_FLIGHT:
                        if queue:
                            batch = queue.popleft()
                        elif not exhausted:
                            batch = next(source, None)
                            if batch is None:
                                exhausted = True
                                break
                        else:
                            break
                        ref = slot.actor.score.remote(batch[1])
                        slot.running.add(ref)
                        running[ref] = (slot, batch)
                if exhausted and not queue and not running:
                    return
                if not running and not starting:
                    raise EngineError("every actor died and no replacement is left "
                                      f"({len(queue)} batches not scored; last: "
                                      f"{self.last_death})")
                if not running and time.monotonic() - waiting_since > self.start_timeout:
                    raise EngineError(
                        f"no qacheck actor became ready within {self.start_timeout:.0f} s: does "
                        "the cluster have a free CPU, and qacheck installed on every node?")
                done, _ = ray.wait(list(running) + list(starting), num_returns=1, timeout=5.0)
                for ref in done:
                    if ref in starting:
                        slot = starting.pop(ref)
                        try:
                            self._check(slot, ray.get(ref))
                            waiting_since = time.monotonic()
                        except RayActorError as exc:
                            self.last_death = str(exc).strip().splitlines()[0]
                            slots.remove(slot)
                            self._replace(slots, starting)
                        except RayTaskError as exc:
                            raise EngineError(f"an actor could not start: {exc}") from None
                        continue
                    slot, batch = running.pop(ref)
                    slot.running.discard(ref)
                    try:
                        results = ray.get(ref)
                    except RayActorError as exc:
                        # the actor or its node is gone: the batch goes back to the queue
                        self.last_death = str(exc).strip().splitlines()[0]
                        queue.appendleft(batch)
                        self.resubmitted += 1
                        if slot in slots:
                            slots.remove(slot)
                            self._replace(slots, starting)
                        continue
                    except RayTaskError as exc:
                        raise EngineError(f"scoring failed on {slot.info.get('host', '?')}: "
                                          f"{exc}") from None
                    waiting_since = time.monotonic()
                    yield batch[0], results
        finally:
            for slot in slots:  # every live actor, ready or starting
                ray.kill(slot.actor)

    def close(self) -> None:
        """Disconnect from the cluster (a ``local`` instance stops with it)."""
        self.ray.shutdown()

    def _replace(self, slots: list[_Slot], starting: dict[Any, _Slot]) -> None:
        """Start a new actor for a dead one while replacements are left (it may wait for a CPU)."""
        if self.replacements_left <= 0:
            return
        self.replacements_left -= 1
        slot, ref = self._start()
        slots.append(slot)
        starting[ref] = slot
