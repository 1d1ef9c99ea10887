"""Where a command's output goes: the report on stdout, progress and warnings on stderr."""

from __future__ import annotations

import os
import time
from collections.abc import Callable
from typing import TextIO


def process_seconds() -> tuple[float, str]:
    """Seconds of the whole command, and what was counted.

    When ``hfcore`` is the program (``main()`` without arguments, as the
    installed script and ``python -m hfcore`` call it) and the system says
    when the process started (Linux), the time since then: interpreter
    start-up and imports included. Otherwise (``main([...])`` called from
    Python, or no such record) the time since :func:`hfcore.cli.main` began,
    which the label says.
    """
    if not FROM_PROCESS_START:
        return time.perf_counter() - COMMAND_STARTED, "since hfcore.cli.main began"
    try:
        with open("/proc/self/stat", encoding="ascii") as handle:
            fields = handle.read().rsplit(")", 1)[1].split()
        with open("/proc/uptime", encoding="ascii") as handle:
            uptime = float(handle.read().split()[0])
        started = int(fields[19]) / os.sysconf("SC_CLK_TCK")  # field 22: start time after boot, in ticks
        return max(uptime - started, time.perf_counter() - COMMAND_STARTED), "since the process started"
    except (OSError, ValueError, IndexError):
        return time.perf_counter() - COMMAND_STARTED, "since hfcore.cli.main began"


#: When the command's entry point ran (set by :func:`hfcore.cli.main`).
COMMAND_STARTED: float = time.perf_counter()
#: Whether this process is the ``hfcore`` program (set by :func:`hfcore.cli.main`).
FROM_PROCESS_START: bool = False


class Console:
    """Where the report goes: stdout for humans, stderr for progress in JSON mode."""

    def __init__(self, stdout: TextIO, stderr: TextIO, json_to_stdout: bool, quiet: bool) -> None:
        self.stdout = stdout
        self.stderr = stderr
        self.json_to_stdout = json_to_stdout
        self.quiet = quiet

    def report(self, text: str) -> None:
        """A section of the human report (suppressed when stdout carries JSON)."""
        if not self.json_to_stdout:
            print(text, file=self.stdout, flush=True)

    def live(self, text: str) -> None:
        """A progress line, shown only in human mode without --quiet."""
        if not (self.json_to_stdout or self.quiet):
            print(text, file=self.stdout, flush=True)

    def warn(self, text: str) -> None:
        """A one-line warning on stderr, shown in every mode."""
        print(f"hfcore: warning: {text}", file=self.stderr, flush=True)

    def data(self, text: str) -> None:
        """The JSON document on stdout."""
        self.stdout.write(text)
        self.stdout.flush()

    def study_progress(self) -> Callable[[str], None] | None:
        """A callback for study messages (which run is going), on stderr; none in JSON mode."""
        # Several SCF runs take a while; say which one is running, on stderr so
        # that stdout holds only the report (or the JSON).
        if self.json_to_stdout:
            return None
        return lambda message: print(f"hfcore: {message}", file=self.stderr, flush=True)


class IntegralProgress:
    """Progress of the stored-integral pass on stderr, once it has taken a while.

    On a terminal one line is rewritten in place; elsewhere (a log file) a
    plain line is written at each quarter so the log stays short.
    """

    DELAY_S = 1.0

    def __init__(self, stream: TextIO, label: str = "two-electron integrals") -> None:
        self.stream = stream
        self.label = label
        self.tty = bool(getattr(stream, "isatty", lambda: False)())
        self.started = time.perf_counter()
        self.shown = 0.0

    def __call__(self, fraction: float) -> None:
        if time.perf_counter() - self.started < self.DELAY_S and fraction < 1.0:
            return
        if fraction <= self.shown or (self.shown == 0.0 and fraction >= 1.0):
            return  # nothing new, or a pass that ended before the first report needs none
        if self.tty:
            end = "\n" if fraction >= 1.0 else ""
            print(f"\rhfcore: {self.label} {100 * fraction:5.1f} %", end=end, file=self.stream, flush=True)
            self.shown = fraction
        elif fraction - self.shown >= 0.25 or fraction >= 1.0:
            print(f"hfcore: {self.label} {100 * fraction:5.1f} % done", file=self.stream, flush=True)
            self.shown = fraction


__all__ = ["Console", "IntegralProgress", "process_seconds", "COMMAND_STARTED", "FROM_PROCESS_START"]
