"""The app's response times in a real browser (Debian's chromium through Playwright, phone viewport).

Starts ``fieldtl app`` on a fresh data folder (the invented demo is imported and measured in the
background, by the warm-up child ``fieldtl app`` starts while the server boots), walks the demo,
then restarts the server on the same folder and walks again, as a tester reopening the app on site
would. Those two walks act the moment a page is shown. Two more walks ("paced"), one on a second
fresh folder and one after another restart, wait PAUSE_S before each action after the first page,
as a person reading the page or choosing a file does (work the app starts in the background, such
as the analysis import the Takes page begins, then ends before the next action rather than during
it). ``FIELDTL_NO_WARMUP=1 python benchmarks/app.py`` measures the same without the warm-up child. Each figure is the wall time from the action (page opened, button clicked, file chosen) until
what it should show is visible:

- server start: from ``fieldtl app`` to the server's answer to its health check (not a page; work
  moved before the first page shows here);

- first page: the Projects page after the server answers its health check;
- demo test: the Takes page with every take's card (each drawn with what it showed, once measured);
- results: the verdict; later pages: Takes and Results again, the Report page opened by address, and
  the Construction page opened by address until its chart of predicted against measured R' shows;
- new take: an uploaded recording's card listed with what it showed (its level line);
- PDF: the download button after "Make the PDF report".

Targets (issue 10, not asserted): first page after a restart under 3 s; opening the demo test and
every later page under 1.5 s; a new take under 1 s; PDF under 3 s. Uses the server helpers of the
browser tests (tests/data/live_server.py). Run: ``python benchmarks/app.py``.
"""

from __future__ import annotations

import io
import os
import re
import shutil
import sys
import tempfile
import time
from collections.abc import Callable
from pathlib import Path

import numpy as np
import soundfile

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT / "tests" / "data"))

from live_server import free_port, start_server, stop_server, wait_until_healthy  # noqa: E402

PHONE = {"width": 390, "height": 844}
TIMEOUT_MS = 180_000
PAUSE_S = 3.0          # the paced walk: a person's time on a page before the next action


def timed(action: Callable[[], object], until: Callable[[], object]) -> float:
    start = time.perf_counter()
    action()
    until()
    return time.perf_counter() - start


def serve(data_dir: Path):
    port = free_port()
    env = {k: v for k, v in os.environ.items() if k not in ("FIELDTL_ACCESS_CODE", "FIELDTL_NO_DEMO")}
    start = time.perf_counter()
    server = start_server([sys.executable, "-m", "fieldtl.cli", "app", "--port", str(port), "--data-dir",
                           str(data_dir)], cwd=ROOT, env=env)
    url = f"http://127.0.0.1:{port}"
    wait_until_healthy(url, timeout_s=120)
    return server, url, time.perf_counter() - start


def new_recording() -> bytes:
    """Six seconds of invented pink-ish noise (never stored before, so not refused as a duplicate)."""
    rng = np.random.default_rng(int(time.time()))
    samples = np.cumsum(rng.standard_normal(48_000 * 6)) * 1e-4
    samples -= np.convolve(samples, np.ones(480) / 480, mode="same")
    buffer = io.BytesIO()
    soundfile.write(buffer, 0.1 * samples / np.max(np.abs(samples)), 48_000, format="WAV", subtype="PCM_24")
    return buffer.getvalue()


def walk(page, url: str, figures: dict[str, float], prefix: str, *, upload: bool, pause_s: float = 0.0) -> None:
    def measure(name: str, action: Callable[[], object], until: Callable[[], object]) -> None:
        if figures.keys() & {f"{prefix} first page"}:
            time.sleep(pause_s)                     # paced walk: after the first page, a pause before acting
        figures[f"{prefix} {name}"] = timed(action, until)

    heading = lambda name: page.get_by_role("heading", name=name, exact=True).wait_for(timeout=TIMEOUT_MS)  # noqa: E731
    cards = page.locator("[class*='st-key-take-card-']")      # one bordered card per take

    def takes_listed() -> int:
        """Wait until the Takes page shows every take's card; the number of takes."""
        heading("Takes")
        counted = page.get_by_text(re.compile(r"Takes so far \(\d+ used, \d+ left out\)"))
        counted.wait_for(timeout=TIMEOUT_MS)
        total = sum(map(int, re.findall(r"\d+", counted.inner_text())))
        wait_for_cards(total)
        return total

    def wait_for_cards(total: int) -> None:
        deadline = time.monotonic() + TIMEOUT_MS / 1000
        while cards.count() < total and time.monotonic() < deadline:
            time.sleep(0.02)
        cards.nth(total - 1).wait_for(timeout=TIMEOUT_MS)        # the last (oldest) card drawn and visible

    verdict = page.get_by_text(re.compile(r"(PASS|FAIL|UNDECIDED) against"))

    def compared() -> None:
        """The Construction page with its chart of predicted against measured R' (needs the assessment)."""
        heading("Construction check")
        page.locator("[data-testid='stVegaLiteChart']").first.wait_for(timeout=TIMEOUT_MS)

    measure("first page", lambda: page.goto(url), lambda: heading("Projects"))
    measure("opening the demo test",
            lambda: page.get_by_role("button", name=re.compile("INVENTED DEMO")).click(timeout=TIMEOUT_MS), takes_listed)
    measure("results", lambda: page.get_by_text("See the results").first.click(),
            lambda: verdict.first.wait_for(timeout=TIMEOUT_MS))
    query = page.url.partition("?")[2]
    measure("takes again", lambda: page.goto(f"{url}/takes?{query}"), takes_listed)
    measure("results again", lambda: page.get_by_text("See the results").first.click(),
            lambda: verdict.first.wait_for(timeout=TIMEOUT_MS))
    measure("report page", lambda: page.goto(f"{url}/report?{query}"), lambda: heading("Report and export"))
    measure("PDF", lambda: page.get_by_role("button", name="Make the PDF report").click(),
            lambda: page.get_by_text("Download the PDF report").wait_for(timeout=TIMEOUT_MS))
    measure("construction page", lambda: page.goto(f"{url}/construction?{query}"), compared)
    if upload:
        page.goto(f"{url}/takes?{query}")
        count = takes_listed()
        data = new_recording()
        name = f"bench-take-{len(figures)}.wav"      # a name no earlier walk used

        def more_takes() -> None:
            page.get_by_text(f"Stored {name}", exact=False).first.wait_for(timeout=TIMEOUT_MS)
            wait_for_cards(count + 1)
            cards.filter(has_text=name).filter(has_text="(100-3150 Hz)").wait_for(timeout=TIMEOUT_MS)

        measure("new take listed", lambda: page.locator("input[type=file]").first.set_input_files(
            {"name": name, "mimeType": "audio/wav", "buffer": data}), more_takes)


def main() -> None:
    from playwright.sync_api import sync_playwright

    chromium = shutil.which("chromium") or shutil.which("chromium-browser")
    if chromium is None:
        sys.exit("chromium is not installed (scripts/test installs Debian's chromium package)")
    figures: dict[str, float] = {}
    with tempfile.TemporaryDirectory(prefix="fieldtl-bench-app-") as folder, sync_playwright() as playwright:
        browser = playwright.chromium.launch(executable_path=chromium, args=[
            "--disable-background-networking", "--disable-component-update", "--no-first-run", "--disable-sync"])
        try:
            for prefix, store, upload, pause_s in (("first start:", "store", False, 0.0),
                                                   ("first start, paced:", "paced", False, PAUSE_S),
                                                   ("after a restart:", "store", True, 0.0),
                                                   ("after a restart, paced:", "store", True, PAUSE_S)):
                server, url, figures[f"{prefix} server start"] = serve(Path(folder) / store)
                try:
                    page = browser.new_page(viewport=PHONE)
                    walk(page, url, figures, prefix, upload=upload, pause_s=pause_s)
                    page.close()
                finally:
                    stop_server(server)
        finally:
            browser.close()
    load = os.getloadavg()[0] if hasattr(os, "getloadavg") else float("nan")
    warmup = "without" if os.environ.get("FIELDTL_NO_WARMUP") else "with"
    print(f"app response times in chromium at 390 x 844 ({warmup} the warm-up child), load average {load:.2f}")
    for name, seconds in figures.items():
        print(f"{name:<48} {seconds:6.2f} s")


if __name__ == "__main__":
    main()
