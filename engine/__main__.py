"""`python -m unbend ...`: the same as the `unbend` command.

The command lives on the spreadsheet side (``unbend.udfs.cli``); the engine
stays importable and testable without it, so it is imported only here, when
the command runs. Without the spreadsheet side this says so and exits 2.
"""
from __future__ import annotations

import sys


def main(argv=None) -> int:
    try:
        from unbend.udfs.cli import main as command
    except ModuleNotFoundError as e:
        missing = e.name or "a module"
        print(f"unbend: the unbend command needs the spreadsheet side of unbend (unbend.udfs), which cannot be "
              f"imported here ({missing} is not installed). Install unbend with its dependencies "
              f"(pip install unbend, or pip install -e . in a clone) and run it again.", file=sys.stderr)
        return 2
    return command(argv)


if __name__ == "__main__":
    code = main()
    try:  # as the `unbend` console script does: every file is in place, skip the slow interpreter teardown
        sys.stdout.flush()
        sys.stderr.flush()
    finally:
        import os
        os._exit(code)
