"""Progress of ``workbench batch`` on stderr: a redrawn bar on a terminal, plain lines otherwise.

On a terminal: one line redrawn in place (rows done, rows per second, time left). Anywhere else
(a log file, a pipe, a scheduler's capture): a plain line at most every ``every`` seconds and at
the end, with no control characters, so the log stays readable.
"""

from __future__ import annotations

import sys
import time

BAR_WIDTH = 24
LOG_EVERY_SECONDS = 10.0


def _clock(seconds: float | None) -> str:
    if seconds is None or seconds != seconds or seconds == float("inf"):
        return "--:--"
    seconds = int(round(seconds))
    hours, rest = divmod(seconds, 3600)
    minutes, secs = divmod(rest, 60)
    return f"{hours}:{minutes:02d}:{secs:02d}" if hours else f"{minutes:02d}:{secs:02d}"


class BatchProgressDisplay:
    """Receives :class:`workbench.engine.batch.BatchProgress` and writes to ``stream``."""

    def __init__(self, stream=None, *, tty: bool | None = None, every: float = LOG_EVERY_SECONDS,
                 clock=time.monotonic):
        self.stream = stream if stream is not None else sys.stderr
        self.tty = bool(getattr(self.stream, "isatty", lambda: False)()) if tty is None else tty
        self.every = every
        self.clock = clock
        self.started = clock()
        self.last_line = None
        self.drawn = False
        self._final = None
        self._pending = False  # a status came in that the log has not shown yet

    def line(self, status) -> str:
        """One status line: rows done of the total, rows per second, time left."""
        # the run's own clock when it gives one (it starts when the first chunk is sent, so
        # drawing the background and starting workers do not count against the rate)
        elapsed = getattr(status, "seconds", 0.0) or (self.clock() - self.started)
        elapsed = max(elapsed, 1e-9)
        new_rows = status.rows_done - status.rows_resumed
        rate = new_rows / elapsed
        total = status.rows_total
        left = None
        if total is not None and rate > 0:
            left = max(total - status.rows_done, 0) / rate
        approx = "~" if status.total_is_estimate else ""
        of = f" of {approx}{total:,}" if total is not None else ""
        share = ""
        if total:
            share = f" {min(status.rows_done / total, 1.0):4.0%}"
        rejected = f", {status.rows_rejected:,} rejected" if status.rows_rejected else ""
        return (f"{status.rows_done:,}{of} rows{share}{rejected}, {rate:,.0f} rows/s, "
                f"{_clock(left)} left")

    def bar(self, status) -> str:
        total = status.rows_total
        filled = 0 if not total else int(round(BAR_WIDTH * min(status.rows_done / total, 1.0)))
        return "[" + "#" * filled + "." * (BAR_WIDTH - filled) + "] " + self.line(status)

    def __call__(self, status) -> None:
        now = self.clock()
        if self.tty:
            self.stream.write("\r" + self.bar(status) + "\x1b[K")
            self.drawn = True
        elif self.last_line is None or now - self.last_line >= self.every:
            self.stream.write(self.line(status) + "\n")
            self.last_line = now
            self._pending = False
        else:
            self._pending = True
        self._final = status
        self.stream.flush()

    def message(self, text: str) -> None:
        """A one-off line (resuming, starting over, the cluster used)."""
        if self.tty and self.drawn:
            self.stream.write("\n")
            self.drawn = False
        self.stream.write(text + "\n")
        self.stream.flush()

    def close(self) -> None:
        """End the bar's line; in a log, write the last status if it was not written."""
        if self.tty and self.drawn:
            self.stream.write("\n")
            self.drawn = False
        elif not self.tty and self._pending:
            self.stream.write(self.line(self._final) + "\n")
            self._pending = False
        self.stream.flush()
