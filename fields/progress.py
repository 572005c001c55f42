"""Progress bars on stderr for the command line's long stages (none off a terminal)."""

from __future__ import annotations

import os
import sys
from typing import Any

#: Environment variable: seconds a stage runs before its bar is shown (default 1; for tests
#: and for anyone who wants the bars at once).
AFTER_VARIABLE = "KEEPCLEAR_PROGRESS_AFTER_S"


def _show_after_s() -> float:
    """The delay before a stage's bar shows: :data:`AFTER_VARIABLE`, else 1 s."""
    try:
        value = float(os.environ.get(AFTER_VARIABLE, "1.0"))
    except ValueError:
        return 1.0
    return value if value >= 0 else 1.0


class Progress:
    """Progress bars on stderr (rich) for stages that take over a second; none off a TTY.

    ``progress(label)`` gives a ``(done, total)`` callback for a stage that reports its
    steps; the callback's ``busy()`` is a context manager for a stage that cannot (a
    keep-out search): after a second it shows an indeterminate bar until the stage ends.
    """

    def __init__(self) -> None:
        import threading

        self.enabled = sys.stderr.isatty() and not os.environ.get("KEEPCLEAR_NO_PROGRESS")
        self.after_s = _show_after_s()
        self._bar: Any = None
        self._lock = threading.Lock()

    def __enter__(self) -> Progress:
        return self

    def __exit__(self, *exc: object) -> None:
        with self._lock:
            if self._bar is not None:
                self._bar.stop()
                self._bar = None

    def _progress_bar(self) -> Any:
        with self._lock:
            if self._bar is None:
                from rich.console import Console
                from rich.progress import BarColumn, Progress, TextColumn, TimeElapsedColumn

                self._bar = Progress(
                    TextColumn("{task.description}"),
                    BarColumn(),
                    TextColumn("{task.percentage:>3.0f}%"),
                    TimeElapsedColumn(),
                    console=Console(stderr=True),
                    transient=True,
                )
                self._bar.start()
            return self._bar

    def __call__(self, label: str) -> Any:
        """A ``(done, total)`` callback for one stage, or None when disabled."""
        if not self.enabled:
            return None
        import contextlib
        import threading
        import time

        start = time.monotonic()
        task: list[Any] = []

        def update(done: int, total: int) -> None:
            if not task:
                if time.monotonic() - start < self.after_s:
                    return
                task.append(self._progress_bar().add_task(label, total=total))
            self._progress_bar().update(task[0], completed=done, total=total)

        @contextlib.contextmanager
        def busy() -> Any:
            shown: list[Any] = []

            def show() -> None:
                shown.append(self._progress_bar().add_task(label, total=None))

            timer = threading.Timer(self.after_s, show)
            timer.daemon = True
            timer.start()
            try:
                yield
            finally:
                timer.cancel()
                timer.join()
                if shown:
                    self._progress_bar().remove_task(shown[0])

        update.busy = busy  # type: ignore[attr-defined]
        return update
