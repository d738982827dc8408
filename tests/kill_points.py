"""Kill a forked child at a chosen point of its work, by construction rather than by timing.

A crash-safety test wants SIGKILL to land *inside* a save or a simulated measurement. Sleeping
a random time and then killing only does that when the machine happens to be slow enough; on
an idle machine the child may already be done. Here the child stops at named pause points
instead: it reports each point on a pipe and waits for the parent's word to go on. The parent
counts the points and, at the one it chose (from a seeded random generator), sends SIGKILL
while the child is held there. The sequence of points is a function of the work alone, so a
run is repeatable on any machine, idle or loaded.

Pause points inside every file save are installed by wrapping, in the child only, the calls
a save is made of: a file opened for writing writes its first half, then pauses
(``WRITE_HALF``: a non-atomic save would leave a torn file here), ``os.replace`` pauses before
(``BEFORE_RENAME``) and after (``AFTER_RENAME``) the rename. A test may add its own points
(``pause(SIM_BLOCK)`` before each block of simulated signal, say).
"""

from __future__ import annotations

import builtins
import io
import os
import signal
from collections.abc import Callable
from dataclasses import dataclass, field
from typing import Any

WRITE_HALF = 1
BEFORE_RENAME = 2
AFTER_RENAME = 3
SIM_BLOCK = 4
POINT_NAMES = {WRITE_HALF: "half written", BEFORE_RENAME: "before rename",
               AFTER_RENAME: "after rename", SIM_BLOCK: "simulated block"}

_GO = b"g"
_channel: tuple[int, int] | None = None  # (report fd, go fd), set in the child only


def pause(point: int) -> None:
    """In the child: report ``point`` and wait for the parent (a no-op outside a child)."""
    if _channel is None:
        return
    report_fd, go_fd = _channel
    os.write(report_fd, bytes([point]))
    if os.read(go_fd, 1) != _GO:  # the parent went away: stop here
        os._exit(5)


class _HalvingWriter:
    """A binary file whose one big write is made in two halves with a pause between."""

    def __init__(self, handle: Any) -> None:
        self._handle = handle

    def write(self, data: bytes) -> int:
        half = len(data) // 2
        self._handle.write(data[:half])
        self._handle.flush()
        pause(WRITE_HALF)
        self._handle.write(data[half:])
        return len(data)

    def __getattr__(self, name: str) -> Any:
        return getattr(self._handle, name)

    def __enter__(self) -> _HalvingWriter:
        self._handle.__enter__()
        return self

    def __exit__(self, *exc: object) -> Any:
        return self._handle.__exit__(*exc)


def _writing(mode: str) -> bool:
    return any(c in mode for c in "wax+")


def _install_save_points() -> None:
    """Wrap the calls a save is made of (in the child process only: it is a fork)."""
    real_open, real_fdopen, real_replace = builtins.open, os.fdopen, os.replace

    def open_(file: Any, mode: str = "r", *args: Any, **kwargs: Any) -> Any:
        handle = real_open(file, mode, *args, **kwargs)
        return _HalvingWriter(handle) if _writing(mode) and "b" in mode else handle

    def fdopen(fd: int, mode: str = "r", *args: Any, **kwargs: Any) -> Any:
        handle = real_fdopen(fd, mode, *args, **kwargs)
        return _HalvingWriter(handle) if _writing(mode) and "b" in mode else handle

    def replace(src: Any, dst: Any, **kwargs: Any) -> None:
        pause(BEFORE_RENAME)
        real_replace(src, dst, **kwargs)
        pause(AFTER_RENAME)

    builtins.open = io.open = open_  # type: ignore[assignment]
    os.fdopen = fdopen  # type: ignore[assignment]
    os.replace = replace  # type: ignore[assignment]


@dataclass
class ChildOutcome:
    """What became of one child: killed at a point, or finished by itself."""

    killed: bool
    exit_code: int | None
    points: list[int] = field(default_factory=list)  # every point reached, in order

    @property
    def killed_at(self) -> int | None:
        return self.points[-1] if self.killed else None


def run_child(work: Callable[[], None], kill_at: int | None,
              on_point: Callable[[int], None] | None = None) -> ChildOutcome:
    """Fork, run ``work`` in the child with pause points, SIGKILL it at point number ``kill_at``.

    ``kill_at`` counts from 1 over every point the child reaches; None lets it run to the end.
    ``on_point(point)`` runs in the parent at each point the child is let past, while the
    child waits there (to look at files between two steps of a save, say). The child's exit
    code is 0 when ``work`` returned and 1 when it raised.
    """
    report_r, report_w = os.pipe()
    go_r, go_w = os.pipe()
    pid = os.fork()
    if pid == 0:  # the child: never return into pytest
        code = 0
        try:
            os.close(report_r)
            os.close(go_w)
            global _channel
            _channel = (report_w, go_r)
            _install_save_points()
            work()
        except BaseException:  # noqa: BLE001 - reported through the exit code
            code = 1
        finally:
            os._exit(code)
    os.close(report_w)
    os.close(go_r)
    points: list[int] = []
    killed = False
    try:
        while True:
            got = os.read(report_r, 1)
            if not got:
                break  # the child finished (or died) by itself
            points.append(got[0])
            if kill_at is not None and len(points) == kill_at:
                os.kill(pid, signal.SIGKILL)
                killed = True
                break
            if on_point is not None:
                on_point(got[0])
            os.write(go_w, _GO)
    finally:
        os.close(report_r)
        os.close(go_w)
    _, status = os.waitpid(pid, 0)
    if killed:
        assert os.WIFSIGNALED(status) and os.WTERMSIG(status) == signal.SIGKILL
        return ChildOutcome(True, None, points)
    return ChildOutcome(False, os.WEXITSTATUS(status) if os.WIFEXITED(status) else -1, points)
