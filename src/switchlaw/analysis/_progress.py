"""A progress bar on stderr with the time left; silent in quiet mode.

On a terminal the bar is redrawn in place; elsewhere (a log file) it writes one line per
tenth of the work, so logs stay short.
"""

from __future__ import annotations

import sys
import time


def clock(seconds: float) -> str:
    """``h:mm:ss`` or ``m:ss``.

    >>> clock(75.2), clock(3725)
    ('1:15', '1:02:05')
    """
    seconds = int(round(seconds))
    hours, rest = divmod(seconds, 3600)
    minutes, secs = divmod(rest, 60)
    return f"{hours}:{minutes:02d}:{secs:02d}" if hours else f"{minutes}:{secs:02d}"


class Progress:
    """Counts finished items; the estimate of time left uses this run's rate only.

    Parameters
    ----------
    total : int
        Items in the scan.
    done : int
        Items already finished (read from a checkpoint).
    enabled : bool
        ``False`` prints nothing.
    """

    WIDTH = 24

    def __init__(self, total: int, done: int = 0, *, enabled: bool = True, stream=None):
        self.total = total
        self.start_done = self.done = done
        self.enabled = enabled and total > 0
        self.stream = sys.stderr if stream is None else stream
        self.tty = bool(getattr(self.stream, "isatty", lambda: False)())
        self.started = time.perf_counter()
        self._next_line = 0.0
        if self.enabled:
            self._draw(force=True)

    def line(self) -> str:
        fraction = self.done / self.total
        filled = int(self.WIDTH * fraction)
        elapsed = time.perf_counter() - self.started
        ran = self.done - self.start_done
        if self.done >= self.total:
            left = "done"
        elif ran > 0:
            left = f"about {clock(elapsed / ran * (self.total - self.done))} left"
        else:
            left = "time left unknown"
        return (f"scan [{'#' * filled}{'.' * (self.WIDTH - filled)}] {self.done}/{self.total} "
                f"({100 * fraction:.0f}%), {clock(elapsed)} elapsed, {left}")

    def _draw(self, force: bool = False) -> None:
        if self.tty:
            self.stream.write("\r" + self.line())
        elif force or self.done / self.total >= self._next_line:
            self.stream.write(self.line() + "\n")
            self._next_line = (int(10 * self.done / self.total) + 1) / 10
        self.stream.flush()

    def advance(self, count: int) -> None:
        self.done += count
        if self.enabled:
            self._draw(force=self.done >= self.total)

    def close(self) -> None:
        if self.enabled and self.tty:
            self.stream.write("\n")
            self.stream.flush()
