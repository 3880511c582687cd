"""Run `adlin ...` in-process for the command-line tests."""

from __future__ import annotations

import contextlib
import io
import os

from adlin.cli.main import main


class Terminal(io.StringIO):
    """A text stream that says it is a terminal (the progress bars draw only there)."""

    def isatty(self) -> bool:
        return True


def run(argv: list[str], err: io.StringIO | None = None) -> tuple[int, str, str]:
    """`adlin ...` with the persistent cache off: (status, stdout, stderr).

    argparse's own errors (SystemExit) become the status; `err` may be a
    `Terminal` to see the progress display.
    """
    out, err = io.StringIO(), err if err is not None else io.StringIO()
    old = os.environ.get("ADLIN_CACHE_DIR")
    os.environ["ADLIN_CACHE_DIR"] = ""
    try:
        with contextlib.redirect_stdout(out), contextlib.redirect_stderr(err):
            try:
                status = main(argv)
            except SystemExit as stop:
                status = stop.code
    finally:
        if old is None:
            os.environ.pop("ADLIN_CACHE_DIR", None)
        else:
            os.environ["ADLIN_CACHE_DIR"] = old
    return status, out.getvalue(), err.getvalue()
