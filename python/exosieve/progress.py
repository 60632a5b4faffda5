"""Progress of a sweep in cases: a tqdm progress bar, or the caller's ``progress(done, total)``."""

from __future__ import annotations

from collections.abc import Callable
from typing import Any

__all__ = ["Progress"]


class Progress:
    """A progress bar in cases with rate and time left (tqdm, a dependency), or a user callable
    ``progress(done, total)``."""

    def __init__(self, total: int, initial: int, progress: bool | Callable[[int, int], Any]):
        self.total, self.done = total, initial
        self.callback = progress if callable(progress) else None
        self.bar: Any = None
        self.reported: int | None = None
        if progress is True:
            from tqdm import tqdm

            self.bar = tqdm(
                total=total, initial=initial, unit="case", dynamic_ncols=True, smoothing=0.1
            )

    def update(self, done: int) -> None:
        done = min(max(done, self.done), self.total)
        if self.bar is not None:
            self.bar.update(done - self.done)
        self.done = done
        self.reported = done
        if self.callback is not None:
            self.callback(done, self.total)

    def finish(self, done: int) -> None:
        """The count at the end, unless the last update already reported it."""
        if self.reported != min(max(done, self.done), self.total):
            self.update(done)

    def close(self) -> None:
        if self.bar is not None:
            self.bar.close()
