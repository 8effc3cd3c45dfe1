"""The app in a real browser: Debian's chromium through Playwright at a phone's 390 x 844 viewport.

Walks the invented demo to its verdict, records a take through the recorder with Chromium's fake
microphone, reloads the page and finds the take still there. With an access code set, every page
address opened directly shows only the gate. In CI a missing browser fails the
test (see the chromium_path fixture in conftest.py); no browser is ever downloaded.
"""

import os
import re
import sys
from pathlib import Path

import make_data
from live_server import free_port, start_server, stop_server, wait_until_healthy
import pytest

REPO = Path(__file__).resolve().parents[1]
PHONE = {"width": 390, "height": 844}
CODE = "k7m2-q9tx-4hvw"
PAGE_PATHS = ("", "projects", "setup", "takes", "results", "construction", "report", "signals", "safety")


def _serve(tmp_path, *extra):
    port = free_port()
    env = {k: v for k, v in os.environ.items() if k not in ("FIELDTL_ACCESS_CODE", "FIELDTL_NO_DEMO")}
    server = start_server([sys.executable, "-m", "fieldtl.cli", "app", "--port", str(port), "--data-dir",
                           str(tmp_path / "store"), *extra], cwd=REPO, env=env)
    url = f"http://127.0.0.1:{port}"
    try:
        wait_until_healthy(url)
        yield url
    finally:
        stop_server(server)


@pytest.fixture
def app_url(tmp_path):
    yield from _serve(tmp_path)


@pytest.fixture
def gated_app_url(tmp_path):
    yield from _serve(tmp_path, "--access-code", CODE)


def _open_demo_test(page, url):
    page.goto(url)
    page.get_by_role("button", name=re.compile("INVENTED DEMO")).click(timeout=60_000)
    page.get_by_role("heading", name="Takes", exact=True).wait_for(timeout=60_000)


@pytest.mark.browser
@pytest.mark.slow
def test_phone_walk_through_demo_recording_and_reload(app_url, chromium_path, tmp_path):
    from playwright.sync_api import sync_playwright

    # The fake microphone plays a 1 kHz tone (peak 0.1), so the recorded take is real audio.
    tone = make_data.write(tmp_path / "tone.wav", make_data.sine(1000, amplitude=0.1, duration_s=5.0),
                           subtype="PCM_16")
    with sync_playwright() as playwright:
        browser = playwright.chromium.launch(executable_path=chromium_path, args=[
            "--use-fake-ui-for-media-stream", "--use-fake-device-for-media-stream",
            f"--use-file-for-fake-audio-capture={tone}", "--disable-background-networking",
            "--disable-component-update", "--no-first-run", "--disable-sync"])
        try:
            page = browser.new_page(viewport=PHONE)
            _open_demo_test(page, app_url)
            page.get_by_text("See the results").click(timeout=180_000)
            verdict = page.get_by_text(re.compile(r"PASS · DnT,w \+ Ctr"))
            verdict.wait_for(timeout=180_000)
            # The invented truth: DnT,w 54 dB and R'w 54 dB (sample_audio/expected.json, ISO 717-1).
            table = page.locator("[data-testid='stTable']")
            assert re.search(r"DnT,w\s+54", table.inner_text()) and re.search(r"R'w\s+54", table.inner_text())
            assert page.evaluate("document.documentElement.scrollWidth") <= PHONE["width"]   # no sideways scroll
            page.screenshot(path=str(tmp_path / "results-phone.png"))

            _open_demo_test(page, app_url)
            page.get_by_label("Recording length, s").fill("2")
            page.get_by_label("Recording length, s").press("Enter")
            frame = page.frame_locator('iframe[title="fieldtl.ui.recorder.recorder"]')
            frame.locator("#fieldtl-record-start").click(timeout=60_000)
            frame.locator('#fieldtl-record-status[data-state="sent"]').wait_for(timeout=60_000)
            stored = page.get_by_text(re.compile(r"Stored recorded-[0-9a-f]{8}\.wav"))
            stored.wait_for(timeout=60_000)
            name = re.search(r"recorded-[0-9a-f]{8}\.wav", stored.inner_text()).group(0)

            page.reload()
            _open_demo_test(page, app_url)
            page.get_by_text(name).first.wait_for(timeout=60_000)     # the take survived the reload
        finally:
            browser.close()


@pytest.mark.browser
def test_phone_every_page_address_shows_only_the_gate_until_the_code(gated_app_url, chromium_path):
    from playwright.sync_api import sync_playwright

    with sync_playwright() as playwright:
        browser = playwright.chromium.launch(executable_path=chromium_path, args=[
            "--disable-background-networking", "--disable-component-update", "--no-first-run", "--disable-sync"])
        try:
            page = browser.new_page(viewport=PHONE)
            for path in PAGE_PATHS:
                page.goto(f"{gated_app_url}/{path}")
                page.get_by_label("Access code").wait_for(timeout=60_000)
                page.wait_for_load_state("networkidle")
                body = page.locator("body").inner_text()
                assert "Invented demo" not in body and "INVENTED DEMO" not in body, path
                headings = page.get_by_role("heading").all_inner_texts()
                assert [h.strip() for h in headings] == ["fieldtl"], (path, headings)
                assert page.locator("[data-testid='stNavigation'], [data-testid='stSidebarNav'], "
                                    "[data-testid='stTopNavLink']").count() == 0, path
                assert page.evaluate("document.documentElement.scrollWidth") <= PHONE["width"]
            page.get_by_label("Access code").fill("K7M2 Q9TX 4HVW")
            page.get_by_role("button", name="Open").click()
            page.get_by_role("heading", name="Projects", exact=True).wait_for(timeout=60_000)
        finally:
            browser.close()
