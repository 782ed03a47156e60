"""Running the `unbend` command in the test process: its exit status, stdout and stderr."""
from __future__ import annotations

import contextlib
import io

from unbend.udfs import cli


def run(argv):
    """`unbend ARGV...` through cli.main: (exit status, stdout, stderr)."""
    out, err = io.StringIO(), io.StringIO()
    with contextlib.redirect_stdout(out), contextlib.redirect_stderr(err):
        code = cli.main([str(a) for a in argv])
    return code, out.getvalue(), err.getvalue()


def one_line(code, out, err):
    """The one-line refusal on stderr, checked: exit status 2, a single `unbend:` line, no traceback."""
    lines = [ln for ln in err.splitlines() if ln.strip()]
    assert code == cli.EXIT_BAD_INPUT and len(lines) == 1 and lines[0].startswith("unbend:"), err
    assert "Traceback" not in out + err
    return lines[0]
