"""Helper for start-up tests: which modules a piece of code loads, in a fresh interpreter."""

from __future__ import annotations

import subprocess
import sys

__all__ = ["modules_loaded_by"]


def modules_loaded_by(code: str, *roots: str) -> list[str]:
    """Run *code* in a new Python process; return the loaded modules under *roots*, sorted.

    A module is under a root when it is the root or its name starts with ``root.``.
    """
    probe = (f"{code}\nimport sys\nroots = {roots!r}\nprint({_MARK!r})\n"
             "print('\\n'.join(sorted(m for m in sys.modules "
             "if any(m == r or m.startswith(r + '.') for r in roots))))")
    proc = subprocess.run([sys.executable, "-c", probe], capture_output=True, text=True)
    assert proc.returncode == 0, proc.stderr
    return proc.stdout.rpartition(_MARK)[2].split()  # what *code* printed is left out


_MARK = "-- modules --"
