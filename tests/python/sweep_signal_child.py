"""The ``exosieve`` command in a child process that sends itself a signal mid-sweep.

    python sweep_signal_child.py SIGNAL CASES exosieve-arguments...

Runs ``exosieve.cli.main(exosieve-arguments)`` with the sweep's progress updated after every
finished chunk (``compare(progress_every=1)``) instead of about every 0.1 s; the update that
reports CASES cases kept sends SIGNAL (a number) to this process. So the signal always arrives
mid-sweep, after exactly CASES cases, whatever the machine's speed. Used by test_cli.py; not
a test itself.
"""

from __future__ import annotations

import os
import signal
import sys
from typing import Any

import exosieve.batch
from exosieve.cli import main


def run(signum: int, cases: int, argv: list[str]) -> int:
    # Ctrl-C raises KeyboardInterrupt, as in a terminal, even when this process was started
    # from one that ignores SIGINT (a background job).
    signal.signal(signal.SIGINT, signal.default_int_handler)
    compare = exosieve.batch.compare
    sent = []

    def signal_at(done: int, total: int) -> None:
        if done == cases and not sent:
            sent.append(done)
            os.kill(os.getpid(), signum)

    def compare_signalling(*args: Any, **kwargs: Any) -> Any:
        kwargs.update(progress=signal_at, progress_every=1)
        return compare(*args, **kwargs)

    exosieve.batch.compare = compare_signalling  # the CLI imports it when it runs a sweep
    try:
        return main(argv)
    finally:
        exosieve.batch.compare = compare


if __name__ == "__main__":
    sys.exit(run(int(sys.argv[1]), int(sys.argv[2]), sys.argv[3:]))
