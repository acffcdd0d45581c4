"""``python tests/faults.py POINT ARGS...``: the cyanorisk command line with the process killed
(``os._exit``, no handler runs, as SIGKILL) at one point of the daily job. Used by
tests/test_faults.py.

Points: ``after_ingest`` (clean tables written and their files recorded), ``after_writing``
(the day's report files written), ``after_sending`` (a notice delivered, not yet marked sent),
``before_recording`` (just before the report is recorded in the store).
"""

from __future__ import annotations

import os
import sys

KILLED = 137
"""128 + SIGKILL (9): what a shell reports for a killed process (POSIX)."""


def _after(owner: object, name: str) -> None:
    real = getattr(owner, name)

    def then_die(*args, **kwargs):
        real(*args, **kwargs)
        os._exit(KILLED)

    setattr(owner, name, then_die)


def _before(owner: object, name: str) -> None:
    setattr(owner, name, lambda *args, **kwargs: os._exit(KILLED))


def arm(point: str) -> None:
    from cyanorisk.pipeline.site import SitePipeline
    from cyanorisk.service import jobs
    from cyanorisk.service.store import Store

    if point == "after_ingest":
        _after(jobs, "_clean")
    elif point == "after_writing":
        _after(SitePipeline, "write_rendered")
    elif point == "after_sending":
        _before(Store, "mark_notice_sent")
    elif point == "before_recording":
        _before(Store, "record_report")
    else:
        raise SystemExit(f"unknown point {point!r}")


if __name__ == "__main__":
    arm(sys.argv[1])
    from cyanorisk.cli import main

    sys.exit(main(sys.argv[2:]))
