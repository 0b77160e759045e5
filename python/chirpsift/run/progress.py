"""Progress of a run across its units: a tqdm bar, or plain lines for batch logs."""

from __future__ import annotations

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

    def close(self) -> None:
        """End the display."""
        if self._bar is not None:
            self._bar.close()
            self._bar = None
