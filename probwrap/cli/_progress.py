"""Progress on the command line's long steps: a bar on a terminal (tqdm, when installed), a
plain line on stderr otherwise, and nothing for quick runs."""

from __future__ import annotations

import sys
import threading
import time
from collections.abc import Iterable, Iterator
from typing import Any

__all__ = ["PROGRESS_DELAY", "progress", "Stages"]

#: seconds a step runs before progress is shown (terminal) or a line is printed (otherwise)
PROGRESS_DELAY = 2.0


def _terminal() -> bool:
    try:
        return sys.stderr.isatty()
    except (AttributeError, ValueError):
        return False


def progress(iterable: Iterable, *, desc: str, total: int | None = None) -> Iterator:
    """Iterate with a progress bar on a terminal once it runs for a moment; plain otherwise.

    Off a terminal a plain line is printed to stderr when the loop takes longer than
    :data:`PROGRESS_DELAY` seconds, and then at most every 10 seconds.
    """
    if _terminal():
        try:
            from tqdm import tqdm
        except ImportError:
            tqdm = None
        if tqdm is not None:
            yield from tqdm(iterable, desc=desc, total=total, leave=False, delay=PROGRESS_DELAY)
            return
    start = last = time.monotonic()
    printed = False
    for i, item in enumerate(iterable):
        now = time.monotonic()
        if now - start > PROGRESS_DELAY and (not printed or now - last > 10.0):
            of = f"/{total}" if total is not None else ""
            print(f"probwrap: {desc}: {i}{of} done ({now - start:.0f} s)", file=sys.stderr,
                  flush=True)
            printed, last = True, now
        yield item


class Stages:
    """Progress over a few named steps of uneven length.

    On a terminal: a bar (tqdm) that counts finished steps and names the running one, with the
    elapsed time ticking; no ETA, since the steps differ in length. Otherwise: a plain line on
    stderr for each step still running after :data:`PROGRESS_DELAY` seconds, repeated every 30
    seconds. Nothing is shown for quick runs.

    Examples
    --------
    >>> with Stages("demo", ["fitting", "writing"]) as stages:
    ...     stages.start("fitting")
    ...     stages.start("writing")
    """

    def __init__(self, verb: str, names: list[str]) -> None:
        self.verb, self.names = verb, list(names)
        self.done = 0
        self.current: str | None = None
        self._since = time.monotonic()
        self._stop = threading.Event()
        self._lock = threading.Lock()
        self._bar = None
        self._thread: threading.Thread | None = None
        self._printed_at: float | None = None
        self._detail: str | None = None

    def __enter__(self) -> Stages:
        if _terminal():
            try:
                from tqdm import tqdm
            except ImportError:
                tqdm = None
            if tqdm is not None:
                self._bar = tqdm(
                    total=len(self.names), desc=self.verb, leave=False, delay=PROGRESS_DELAY,
                    bar_format="{desc}: {bar} {n_fmt}/{total_fmt} steps [{elapsed}]",
                    file=sys.stderr,
                )
        self._thread = threading.Thread(target=self._tick, daemon=True)
        self._thread.start()
        return self

    def start(self, name: str) -> None:
        """Mark the previous step finished and ``name`` running."""
        with self._lock:
            if self.current is not None:
                self.done += 1
                if self._bar is not None:
                    self._bar.update(1)
            self.current = name
            self._detail = None
            self._since = time.monotonic()
            self._printed_at = None
            if self._bar is not None:
                self._bar.set_description_str(f"{self.verb}: {name}", refresh=False)

    def detail(self, step: str, done: int | None = None, total: int | None = None) -> None:
        """Name the part of the running step that is in progress (e.g. a report's section).

        Has the signature of the ``progress`` callbacks of the library
        (``progress(step, done, total)``), so it can be passed to them directly.
        """
        with self._lock:
            count = f" {done}/{total}" if done is not None and total else ""
            self._detail = f"{step}{count}"
            if self._bar is not None and self.current is not None:
                self._bar.set_description_str(
                    f"{self.verb}: {self.current}: {self._detail}", refresh=False
                )

    def _tick(self) -> None:
        while not self._stop.wait(0.5):
            with self._lock:
                if self._bar is not None:
                    self._bar.refresh()
                    continue
                if self.current is None:
                    continue
                now = time.monotonic()
                if now - self._since < PROGRESS_DELAY:
                    continue
                if self._printed_at is None or now - self._printed_at >= 30.0:
                    detail = f": {self._detail}" if self._detail else ""
                    print(
                        f"probwrap {self.verb}: step {self.done + 1}/{len(self.names)}: "
                        f"{self.current}{detail} ({now - self._since:.0f} s)",
                        file=sys.stderr, flush=True,
                    )
                    self._printed_at = now

    def __exit__(self, *exc: Any) -> None:
        self._stop.set()
        if self._thread is not None:
            self._thread.join()
        with self._lock:
            if self._bar is not None:
                if exc[0] is None:
                    self._bar.update(len(self.names) - self._bar.n)
                self._bar.close()
