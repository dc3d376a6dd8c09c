"""Progress lines: what a long command is doing, how long it has taken and, in loops, how long is left.

One small helper shared by the command line and any library code that runs for more than a moment.
A :class:`Progress` reporter prints one line per event to stderr::

    metasim: reading inputs (0.0 s)
    metasim: [2/7] mismatch of 'A': 1000 observers x 40 stimuli (3.1 s)
    metasim: sweep chunks: 3/12, about 40 s left (15.2 s)
    metasim: still working on step 3 of 7 (17.3 s)

and says nothing with ``quiet=True`` (the ``--quiet`` option). Elapsed times count from the moment
the reporter was made (the command's start, in the CLI).

* :meth:`Progress.say` — one line (``activity=`` names what runs until the next line, for the
  heartbeat: ``still loading the numerical modules``);
* :meth:`Progress.step` (also the reporter called as a function) — a numbered step ``[i/N]``; it is
  the ``progress`` callback of :func:`metasim.study.run_study`;
* :meth:`Progress.loop` — iterate over a long loop with a line at most every second giving the count
  done and an estimate of the time left (mean time per item so far × items left);
* while the reporter is used as a context manager (``with Progress(...) as progress:``) a background
  thread keeps it from falling silent: after ``heartbeat`` seconds (default 2) with no line it prints
  ``still working ...`` — in place on a terminal, as a line otherwise — until the next line.

Library code deep down (a kernel compile, a slow loop) need not take a reporter argument: it calls
:func:`current` and reports to whatever reporter the command made active (:func:`activate`); with
none active, :func:`current` returns a silent reporter.
"""

from __future__ import annotations

import contextlib
import sys
import threading
import time
from collections.abc import Callable, Iterable, Iterator

#: seconds without a line before the background thread says the command is still working
HEARTBEAT_S = 2.0
#: seconds between two lines of :meth:`Progress.loop`
LOOP_EVERY_S = 1.0


def format_duration(seconds: float) -> str:
    """``4.2`` → ``"4 s"``, ``95`` → ``"1 min 35 s"``, ``4000`` → ``"1 h 7 min"``.

    Parameters
    ----------
    seconds : float
        A duration.

    Returns
    -------
    str
        The duration in hours, minutes and seconds, the two largest units only.

    Examples
    --------
    >>> from metasim.progress import format_duration
    >>> format_duration(4.2), format_duration(95), format_duration(4000)
    ('4 s', '1 min 35 s', '1 h 7 min')
    """
    seconds = max(0.0, float(seconds))
    if seconds < 60:
        return f"{max(seconds, 1):.0f} s"
    minutes, secs = divmod(int(round(seconds)), 60)
    if minutes < 60:
        return f"{minutes} min {secs} s" if minutes < 10 and secs else f"{minutes} min"
    hours, minutes = divmod(int(round(seconds / 60)), 60)
    return f"{hours} h {minutes} min" if minutes else f"{hours} h"


class Progress:
    """A reporter of progress lines on stderr (module docstring).

    Parameters
    ----------
    steps : int
        Number of numbered steps expected (:meth:`step`); grows when more are reported.
    quiet : bool
        Print nothing.
    stream : file, optional
        Where the lines go (default ``sys.stderr``, looked up when a line is printed).
    clock : callable, optional
        Seconds as a float (default :func:`time.monotonic`); tests pass their own.
    prefix : str
        Start of every line (default ``"metasim"``).
    heartbeat : float or None
        Seconds without a line before "still working" is printed while the reporter is active as a
        context manager (None: never).
    """

    def __init__(self, steps: int = 0, *, quiet: bool = False, stream=None, clock: Callable[[], float] | None = None,
                 prefix: str = "metasim", heartbeat: float | None = HEARTBEAT_S):
        self.steps, self.done, self.quiet, self.prefix = int(steps), 0, bool(quiet), prefix
        self._stream, self.clock, self.heartbeat = stream, clock or time.monotonic, heartbeat
        self.start = self.clock()
        self.last = self.start  # time of the last line
        self._lock = threading.RLock()
        self._status = False  # a "still working" status is shown in place on a terminal
        self._stop: threading.Event | None = None
        self._thread: threading.Thread | None = None
        self.activity: str | None = None  # what the heartbeat says is going on ("still <activity>")

    # -- output --------------------------------------------------------------------------------------------
    @property
    def stream(self):
        return self._stream if self._stream is not None else sys.stderr

    def elapsed(self) -> float:
        """Seconds since the reporter was made."""
        return self.clock() - self.start

    def _write(self, text: str, *, in_place: bool = False) -> None:
        if self.quiet:
            return
        with self._lock:
            stream = self.stream
            line = f"{self.prefix}: {text} ({self.elapsed():.1f} s)"
            tty = bool(getattr(stream, "isatty", lambda: False)())
            if self._status:
                stream.write("\r\x1b[K")
                self._status = False
            if in_place and tty:
                stream.write(line)
                self._status = True
            else:
                stream.write(line + "\n")
            stream.flush()
            self.last = self.clock()

    def say(self, text: str, *, activity: str | None = None) -> None:
        """One line: ``metasim: text (elapsed)``. ``activity`` names what runs until the next line
        (the heartbeat then says ``still <activity>``)."""
        with self._lock:
            self.activity = activity
            self._write(text)

    def step(self, text: str) -> None:
        """A numbered step: ``metasim: [i/N] text (elapsed)``."""
        with self._lock:
            self.done += 1
            self.steps = max(self.steps, self.done)
            self.activity = None
            self._write(f"[{self.done}/{self.steps}] {text}")

    __call__ = step  # the progress callback of the library (metasim.study.run_study)

    def loop(self, items: Iterable, what: str, *, total: int | None = None, every: float = LOOP_EVERY_S) -> Iterator:
        """Iterate over ``items`` with a line at most every ``every`` seconds: ``what: i/n, about T left``.

        The estimate of the time left is the mean time per item so far times the items left; the
        last line says how long the whole loop took.
        """
        if total is None:
            try:
                total = len(items)  # type: ignore[arg-type]
            except TypeError:
                total = None
        begin = shown = self.clock()
        count = 0
        for item in items:
            yield item
            count += 1
            now = self.clock()
            if now - shown >= every and (total is None or count < total):
                shown = now
                self._write(f"{what}: {count}/{total}, {self.time_left(count, total, now - begin)}"
                            if total else f"{what}: {count} done")
        self._write(f"{what}: {count}{'/' + str(total) if total else ''} done in "
                    f"{format_duration(self.clock() - begin)}")

    @staticmethod
    def time_left(done: int, total: int, spent: float) -> str:
        """``"about 40 s left"``: ``spent / done × (total - done)``."""
        if done <= 0:
            return "time left not known yet"
        return f"about {format_duration(spent / done * (total - done))} left"

    # -- the heartbeat ---------------------------------------------------------------------------------------
    def _beat(self) -> None:
        stop = self._stop
        while not stop.wait(min(0.25, self.heartbeat / 4)):
            with self._lock:
                if self.clock() - self.last < self.heartbeat:
                    continue
                if self.activity:
                    self._write(f"still {self.activity}", in_place=True)
                    continue
                doing = f" on step {self.done + 1} of {self.steps}" if self.steps > self.done else ""
                self._write(f"still working{doing}", in_place=True)

    def __enter__(self) -> Progress:
        _ACTIVE.append(self)
        if self.heartbeat and not self.quiet:
            self._stop = threading.Event()
            self._thread = threading.Thread(target=self._beat, name="metasim-progress", daemon=True)
            self._thread.start()
        return self

    def __exit__(self, *exc) -> None:
        if self._thread is not None:
            self._stop.set()
            self._thread.join()
            self._thread = None
        with self._lock:
            if self._status and not self.quiet:
                self.stream.write("\n")
                self.stream.flush()
                self._status = False
        if self in _ACTIVE:
            _ACTIVE.remove(self)


_ACTIVE: list[Progress] = []
_SILENT = Progress(quiet=True, heartbeat=None)


def current() -> Progress:
    """The reporter of the running command (the innermost active one), or a silent reporter.

    Returns
    -------
    Progress
        The innermost active reporter, or a silent one.

    Examples
    --------
    >>> from metasim.progress import current
    >>> current().say("nobody listens")  # silent outside a command
    """
    return _ACTIVE[-1] if _ACTIVE else _SILENT


@contextlib.contextmanager
def activate(progress: Progress):
    """Make ``progress`` the reporter :func:`current` returns, and run its heartbeat, inside a
    ``with`` block (the same as ``with progress:``).

    Parameters
    ----------
    progress : Progress
        The command's reporter.

    Yields
    ------
    Progress
        ``progress``, active until the block ends.

    Examples
    --------
    >>> from metasim.progress import Progress, activate, current
    >>> reporter = Progress(quiet=True)
    >>> with activate(reporter):
    ...     current() is reporter
    True
    """
    with progress:
        yield progress


__all__ = ["HEARTBEAT_S", "LOOP_EVERY_S", "Progress", "activate", "current", "format_duration"]
