"""Progress of a run across its units: a tqdm bar, or plain lines for batch logs."""

from __future__ import annotations

import contextlib
import sys
import time

__all__ = ["Progress"]


class Progress:
    """Report units as they start and finish.

    Parameters
    ----------
    total : int
        Units to run (skipped ones excluded).
    mode : {"bar", "lines", "off"}
        ``"bar"``: a tqdm bar on ``stream`` with rate and time left; ``"lines"``: one
        line per ``every`` units or per ``seconds`` seconds, whichever comes first, and
        at the end; ``"off"``: nothing.
    every : int
        Units between lines (``"lines"`` mode).
    seconds : float
        Longest time between lines, checked when a unit starts or ends.
    stream : file, optional
        Where to write (default: ``sys.stderr``).
    clock : callable, optional
        Time source in seconds (for tests).
    """

    def __init__(self, total: int, mode: str = "bar", *, every: int = 10, seconds: float = 60.0, stream=None,
                 clock=time.monotonic):
        if mode not in ("bar", "lines", "off"):
            raise ValueError(f"mode must be 'bar', 'lines' or 'off', got {mode!r}")
        self.total, self.mode, self.every, self.seconds = total, mode, every, seconds
        self.stream = sys.stderr if stream is None else stream
        self.clock = clock
        self.done = 0
        self.start = self.last = clock()
        self._since = 0
        self._bar = None
        if mode == "bar" and total:
            from tqdm import tqdm

            self._bar = tqdm(total=total, unit="unit", desc="chirpsift run", file=self.stream, position=0)

    def _line(self, text: str) -> None:
        elapsed = self.clock() - self.start
        left = ""
        if 0 < self.done < self.total:
            left = f", about {elapsed / self.done * (self.total - self.done):.0f} s left"
        print(f"chirpsift run: {self.done}/{self.total} units done, {elapsed:.0f} s elapsed{left}; {text}",
              file=self.stream, flush=True)
        self.last = self.clock()
        self._since = 0

    def started(self, key: str) -> None:
        """Note that a unit starts."""
        if self._bar is not None:
            self._bar.set_postfix_str(key)
        elif self.mode == "lines" and self.clock() - self.last >= self.seconds:
            self._line(f"running {key}")

    def finished(self, key: str, seconds: float) -> None:
        """Note that a unit has published its files."""
        self.done += 1
        self._since += 1
        if self._bar is not None:
            self._bar.update(1)
        elif self.mode == "lines" and (self._since >= self.every or self.done == self.total
                                       or self.clock() - self.last >= self.seconds):
            self._line(f"{key} took {seconds:.1f} s")

    @contextlib.contextmanager
    def inside(self, key: str):
        """Run a unit's own progress display inside this one.

        In ``"lines"`` mode the unit's tqdm bar (which writes to ``sys.stderr``) is
        caught and passed on as at most one line per ``seconds``, with its rate and time
        left; in the other modes nothing changes.
        """
        if self.mode != "lines":
            yield
            return
        with contextlib.redirect_stderr(_Throttled(self, key)):
            yield

    def close(self) -> None:
        """End the display."""
        if self._bar is not None:
            self._bar.close()
            self._bar = None


class _Throttled:
    """A text stream that keeps a tqdm bar's latest state and prints it as a line now and then."""

    def __init__(self, progress: Progress, key: str):
        self.progress, self.key = progress, key

    def write(self, text: str) -> int:
        state = text.replace("\r", "\n").strip().splitlines()
        if state and self.progress.clock() - self.progress.last >= self.progress.seconds:
            self.progress._line(f"{self.key}: {state[-1].strip()}")
        return len(text)

    def flush(self) -> None:
        """Nothing to flush: lines are written whole."""
