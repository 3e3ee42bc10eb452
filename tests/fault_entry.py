"""Run the prunebench command line with a pause inside every group's write transaction.

Not a test module: the reliability suite starts it in a subprocess to kill a sweep in the
middle of a write.  It installs the store's write hook (touch MARKER, then sleep SECONDS)
and hands the rest of the arguments to the command line::

    python tests/fault_entry.py SECONDS MARKER conduct STUDY --db DB
"""

from __future__ import annotations

import sys
import time
from pathlib import Path

from prunebench.cli import main
from prunebench.store import ResultStore


def _install(seconds: float, marker: Path) -> None:
    def pause() -> None:
        marker.touch()
        time.sleep(seconds)

    ResultStore.write_hook = staticmethod(pause)


if __name__ == "__main__":
    _install(float(sys.argv[1]), Path(sys.argv[2]))
    main(args=sys.argv[3:], prog_name="prunebench")
