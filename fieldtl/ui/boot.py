"""The app's server process: Streamlit's own command line, plus a background thread that imports what
the pages need next (the Results page's chart and export, the analysis for a new take) as soon as the
server's runtime exists, so that import runs while the server boots instead of overlapping a page a
tester has just tapped. ``fieldtl app`` replaces itself with this process.
"""

from __future__ import annotations

import sys
import threading
import time

from fieldtl import warmup

RUNTIME_WAIT_S = 60.0


def import_when_serving(*, timeout_s: float = RUNTIME_WAIT_S) -> None:
    """Wait for Streamlit's runtime (the pages' caches belong to it), then import ahead."""
    from streamlit.runtime import Runtime

    deadline = time.monotonic() + timeout_s
    while not Runtime.exists():
        if time.monotonic() > deadline:
            return                   # only a head start: the pages import what they use themselves
        time.sleep(0.02)
    from fieldtl.ui.cached import MEASURING_MODULES, RESULTS_MODULES

    warmup.import_ahead(RESULTS_MODULES + MEASURING_MODULES)


def main() -> None:
    threading.Thread(target=import_when_serving, name="fieldtl-imports-boot", daemon=True).start()
    from streamlit.web import cli

    sys.argv = ["streamlit", *sys.argv[1:]]
    sys.exit(cli.main(prog_name="streamlit"))


if __name__ == "__main__":
    main()
