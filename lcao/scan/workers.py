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

A child that is done before the parent can do side work for it (:func:`after_result`): it sends
what it computes (:func:`send_side_work`) while the parent, between the points of its own sweep,
takes it (:func:`take_side_work`); the parent stops the child once every result is in.
"""

from __future__ import annotations

import gc
import logging
import multiprocessing as mp
import os
import sys
import threading

log = logging.getLogger(__name__)

#: in a forked child: its connection to the parent, and work to do once its result has gone
_TO_PARENT = None
_AFTER: list = []
#: in the parent, while it runs its own group: per child [connection, final message or None]
_OPEN: list = []
#: children whose result has arrived but who were not waited for (reaped on the next call)
_UNREAPED: list = []


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


def after_result(work) -> None:
    """In a forked child: run ``work()`` once this child's result has gone to the parent (side work
    such as :func:`send_side_work`; the parent stops the child when it no longer needs it). Does
    nothing elsewhere, e.g. where the parent computes a failed child's part itself."""
    if _TO_PARENT is not None:
        _AFTER.append(work)


def send_side_work(payload) -> None:
    """From a forked child's side work: ``payload`` to the parent now (:func:`take_side_work`)."""
    _TO_PARENT.send(("side", payload))


def take_side_work() -> list:
    """The side-work payloads the children have sent so far, while this process runs its own group in
    :func:`run_groups` (an empty list elsewhere); costs a poll of each child's pipe."""
    out = []
    for entry in _OPEN:
        conn = entry[0]
        try:
            while conn.poll():
                msg = conn.recv()
                if msg[0] == "side":
                    out.append(msg[1])
                else:  # the child's result, kept for the join
                    entry[1] = msg
        except (EOFError, OSError):  # the child ended; the join reports it
            continue
    return out


def _child(fn, group, conn, parent):
    global _TO_PARENT
    die_with_parent(parent)
    _TO_PARENT = conn
    try:
        conn.send(("ok", fn(group, True)))
    except BaseException as exc:  # noqa: BLE001 - reported to the parent, which decides
        try:
            conn.send(("error", f"{type(exc).__name__}: {exc}"))
        except Exception:  # pragma: no cover - parent gone
            pass
        conn.close()
        return
    try:
        for work in _AFTER:
            work()
    except BaseException:  # noqa: BLE001 - side work is optional; the parent has the result
        pass
    finally:
        conn.close()


#: pipe buffer asked for (Linux allows unprivileged processes up to /proc/sys/fs/pipe-max-size,
#: 1 MiB by default): side work of about eight N2 6-31G integral sets (118 KB each) is not held
#: up waiting for the parent to read, which it does only between its points
PIPE_BYTES = 1 << 20


def _widen(conn) -> None:
    try:
        import fcntl

        fcntl.fcntl(conn.fileno(), fcntl.F_SETPIPE_SZ, PIPE_BYTES)
    except (ImportError, AttributeError, OSError):  # not Linux, or a lower limit: the default stands
        pass


def _reap() -> None:
    """Wait for children that have ended since their result arrived (no zombies left behind)."""
    _UNREAPED[:] = [p for p in _UNREAPED if p.is_alive()]


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
    _reap()
    children = []
    try:
        gc.freeze()  # a collection in a child would touch, and so copy, every page of the parent's objects
        try:
            for group in groups[1:]:
                recv, send = ctx.Pipe(duplex=False)
                _widen(send)
                proc = ctx.Process(target=_child, args=(fn, group, send, os.getpid()), daemon=True)
                proc.start()
                send.close()
                children.append((proc, recv, group))
        finally:
            gc.unfreeze()
        entries = [[recv, None] for _, recv, _ in children]
        _OPEN[:] = entries
        try:
            results = [fn(groups[0], False)]
        finally:
            _OPEN.clear()
        for (proc, recv, group), entry in zip(children, entries):
            msg = entry[1]
            while msg is None:
                try:
                    msg = recv.recv()
                except EOFError:
                    proc.join()
                    msg = ("error", f"ended without a result (exit code {proc.exitcode})")
                if msg[0] == "side":  # side work that came too late to be of use
                    msg = None
            status, payload = msg
            if status != "ok":
                if payload.startswith("KeyboardInterrupt"):
                    raise KeyboardInterrupt
                log.warning("a sweep worker process failed (%s); computing its part here", payload)
                payload = fn(group, True)
            results.append(payload)
        # every result is here: a child still at side work is stopped, and none is waited for now
        # (a child's exit takes about 7 ms for a 120 MB process; _reap collects them later)
        for proc, recv, _ in children:
            if proc.is_alive():
                proc.terminate()
            _UNREAPED.append(proc)
        return results
    finally:
        for proc, recv, _ in children:
            if proc.is_alive() and proc not in _UNREAPED:
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
