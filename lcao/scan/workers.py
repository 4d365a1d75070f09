"""Independent sweeps of one curve in forked worker processes.

A sweep is a chain of warm-started points, so it runs in one process; the sweeps of a curve
(the two halves of the sweep from equilibrium, the sweeps from the atoms) are independent of
each other. :func:`run_groups` runs the first group of sweeps in this process and every other
group in a child forked from it. Forking copies the loaded PySCF, the cached integrals and the
inputs at no cost (a spawned process would first spend 0.5-0.8 s importing PySCF), so this
pays even for a 40-point STO-3G curve.

A fork is only taken where it is safe and useful (:func:`fork_possible`): on Linux, with no
other thread alive in this process (a forked child inherits locks held by other threads), not
inside a daemonic pool worker (a series already spreads its members over processes), and
with at least two cores for this process. Each child writes its points to the file store
itself (so an interrupted run keeps them) and sends them back over a pipe; the parent adds
them to its own store, which for the in-memory store is the only copy. A child that fails or
dies has its part computed again in the parent.
"""

from __future__ import annotations

import gc
import logging
import multiprocessing as mp
import os
import sys
import threading

log = logging.getLogger(__name__)


def fork_possible(budget: int) -> bool:
    """Whether sweeps may run in forked children now (see the module docstring)."""
    if budget < 2 or not sys.platform.startswith("linux"):
        return False
    if "fork" not in mp.get_all_start_methods():  # pragma: no cover - Linux has it
        return False
    if threading.active_count() != 1 or mp.current_process().daemon:
        return False
    return True


def die_with_parent(parent: int) -> None:
    """Ask Linux to kill this child when its parent dies (a SIGKILLed run leaves no orphans)."""
    import ctypes
    import signal

    try:
        ctypes.CDLL(None, use_errno=True).prctl(1, int(signal.SIGKILL))  # PR_SET_PDEATHSIG
    except (OSError, AttributeError):  # pragma: no cover - not glibc
        pass
    if os.getppid() != parent:  # the parent died before the request took effect
        os._exit(1)


def _child(fn, group, conn, parent):
    die_with_parent(parent)
    try:
        conn.send(("ok", fn(group, True)))
    except BaseException as exc:  # noqa: BLE001 - reported to the parent, which decides
        try:
            conn.send(("error", f"{type(exc).__name__}: {exc}"))
        except Exception:  # pragma: no cover - parent gone
            pass
    finally:
        conn.close()


def run_groups(groups, fn):
    """Run ``fn(group, in_child)`` for every group: the first here, the others in forked children.

    A child that fails or dies (other than by an interrupt) loses nothing: its group is run again
    here, as the child would have run it (``in_child`` True), with a warning.

    Returns:
        the results in group order.

    Raises:
        KeyboardInterrupt: the children are stopped when this process is interrupted.
    """
    ctx = mp.get_context("fork")
    children = []
    try:
        gc.freeze()  # a collection in a child would touch, and so copy, every page of the parent's objects
        try:
            for group in groups[1:]:
                recv, send = ctx.Pipe(duplex=False)
                proc = ctx.Process(target=_child, args=(fn, group, send, os.getpid()), daemon=True)
                proc.start()
                send.close()
                children.append((proc, recv, group))
        finally:
            gc.unfreeze()
        results = [fn(groups[0], False)]
        for proc, recv, group in children:
            try:
                status, payload = recv.recv()
            except EOFError:
                status, payload = "error", f"ended without a result (exit code {proc.exitcode})"
            proc.join()
            if status != "ok":
                if payload.startswith("KeyboardInterrupt"):
                    raise KeyboardInterrupt
                log.warning("a sweep worker process failed (%s); computing its part here", payload)
                payload = fn(group, True)
            results.append(payload)
        return results
    finally:
        for proc, recv, _ in children:
            if proc.is_alive():
                proc.terminate()
                proc.join()
            recv.close()


def balance(tasks, sizes, n_groups: int):
    """Split tasks into at most ``n_groups`` groups of similar total size (largest first, each to
    the lightest group), keeping the first task in the first group."""
    groups = [[] for _ in range(n_groups)]
    loads = [0] * n_groups
    order = sorted(range(len(tasks)), key=lambda i: (i != 0, -sizes[i]))
    for i in order:
        g = 0 if i == 0 else min(range(n_groups), key=lambda j: loads[j])
        groups[g].append(tasks[i])
        loads[g] += sizes[i]
    return [g for g in groups if g]


def split_map(fn, items, workers: int):
    """``[fn(x) for x in items]``, the items split into contiguous chunks over this process and
    forked children when :func:`fork_possible`; results in item order."""
    items = list(items)
    if workers < 2 or len(items) < 2 or not fork_possible(workers):
        return [fn(x) for x in items]
    n = min(workers, len(items))
    size = -(-len(items) // n)
    chunks = [items[k:k + size] for k in range(0, len(items), size)]
    out = run_groups(chunks, lambda chunk, _child: [fn(x) for x in chunk])
    return [y for part in out for y in part]
