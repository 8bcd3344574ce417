"""Run the ``thermoledger`` command as a subprocess (as a user would)."""
from __future__ import annotations

import subprocess
import sys


def thermoledger(*args, cwd=None) -> subprocess.CompletedProcess:
    return subprocess.run([sys.executable, "-c", "from pipeline.cli.app import main; main()", *map(str, args)],
                          capture_output=True, text=True, cwd=cwd, timeout=300)
