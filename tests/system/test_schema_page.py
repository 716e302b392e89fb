"""The schema page in a real browser: Debian's chromium, driven by playwright, with only 127.0.0.1 reachable.

Loads /docs from the running gunicorn server, checks the compute operations are listed, runs
POST /v1/descriptors/samples from the page ("Try it out", "Execute") and reads the 200 shown
there, and checks that no request went anywhere but the server. The screenshot is saved to
test-artifacts/schema-page.png. Without chromium the test is skipped, unless
REQUIRE_BROWSER=1 (set by .ci/run), where it fails instead. (Not a TAILGAUGE_* name: the
service rejects unknown TAILGAUGE_* variables at startup.)
"""

from __future__ import annotations

import json
import os
import urllib.error
import urllib.request
from pathlib import Path

import pytest

from .server import REPO

CHROMIUM = Path("/usr/bin/chromium")
ARTIFACTS = REPO / "test-artifacts"
# The launch flags that keep chromium itself from calling out (STACK-NOTES, "Browser check").
CHROMIUM_ARGS = [
    "--no-sandbox",
    "--disable-gpu",
    "--disable-background-networking",
    "--disable-component-update",
    "--no-first-run",
    "--disable-sync",
]
SAMPLES = "/v1/descriptors/samples"
# The roastery's bag weights from the README, a body the service answers with 200.
EXAMPLE = {"values": [251.2, 249.8, 250.4, 252.9, 250.1, 249.5, 250.7, 251.0, 248.9, 250.3, 250.3]}


def _require_chromium() -> None:
    if CHROMIUM.exists():
        return
    message = f"{CHROMIUM} is missing (apt-get install -y --no-install-recommends chromium)"
    if os.environ.get("REQUIRE_BROWSER") == "1":
        pytest.fail(message)
    pytest.skip(message)


def test_schema_page_lists_the_operations_and_runs_one_with_nothing_leaving_the_machine(shared_server):
    _require_chromium()
    from playwright.sync_api import expect, sync_playwright

    base = shared_server.base_url
    compute_paths = [
        path for path in json.loads(_get(f"{base}/openapi.json"))["paths"] if path.startswith("/v1/descriptors/")
    ]
    assert SAMPLES in compute_paths
    local, blocked = [], []

    def route(route_request) -> None:
        url = route_request.request.url
        if url == base or url.startswith(base + "/"):
            local.append(url)
            route_request.continue_()
        else:
            blocked.append(url)
            route_request.abort()

    ARTIFACTS.mkdir(exist_ok=True)
    with sync_playwright() as playwright:
        browser = playwright.chromium.launch(executable_path=str(CHROMIUM), headless=True, args=CHROMIUM_ARGS)
        try:
            context = browser.new_context(viewport={"width": 1280, "height": 1600}, service_workers="block")
            context.route("**/*", route)
            page = context.new_page()
            seen = []
            page.on("request", lambda request: seen.append(request.url))
            page.goto(f"{base}/docs", wait_until="networkidle")

            for path in compute_paths:
                expect(page.locator(f'.opblock-post .opblock-summary-path[data-path="{path}"]')).to_be_visible()

            operation = page.locator(".opblock-post").filter(
                has=page.locator(f'.opblock-summary-path[data-path="{SAMPLES}"]')
            )
            operation.locator(".opblock-summary").click()
            operation.get_by_role("button", name="Try it out").click()
            body = operation.locator("textarea.body-param__text")
            expect(body).to_be_visible()
            # The page generates a body from the schema; keep it if the service accepts it, else use ours.
            default_body = body.input_value()
            default_status = _post_status(base + SAMPLES, default_body.encode())
            if default_status != 200:
                body.fill(json.dumps(EXAMPLE, indent=2))
            sent = json.loads(body.input_value())

            with page.expect_response(lambda r: r.url == base + SAMPLES and r.request.method == "POST") as caught:
                operation.get_by_role("button", name="Execute").click()
            answer = caught.value
            assert answer.status == 200, answer.text()
            assert answer.json()["size"]["n"] == len(sent["values"])
            shown = operation.locator(".live-responses-table .response .response-col_status").first
            expect(shown).to_have_text("200")
            operation.locator(".live-responses-table").scroll_into_view_if_needed()
            page.screenshot(path=str(ARTIFACTS / "schema-page.png"), full_page=True)
        finally:
            browser.close()

    assert blocked == [], f"requests that would have left the machine: {blocked}"
    assert local and all(url.startswith(base) for url in seen), seen
    assert any(url == base + SAMPLES for url in local)
    print(f"page's generated body answered {default_status}; {'kept' if default_status == 200 else 'replaced'}")


def _get(url: str) -> bytes:
    with urllib.request.urlopen(url, timeout=10) as answer:
        return answer.read()


def _post_status(url: str, body: bytes) -> int:
    request = urllib.request.Request(url, body, {"Content-Type": "application/json"})
    try:
        with urllib.request.urlopen(request, timeout=30) as answer:
            return answer.status
    except urllib.error.HTTPError as error:
        return error.code


def test_try_it_out_with_image_svg_shows_the_figure(shared_server):
    """"Try it out" on samples with the response media type image/svg+xml: the page shows the
    figure (an image, not its XML source); its screenshot (test-artifacts/schema-page-figure.png)
    is not blank; nothing leaves the machine."""
    _require_chromium()
    from PIL import Image
    from playwright.sync_api import expect, sync_playwright

    base = shared_server.base_url
    blocked: list[str] = []

    def route(route_request) -> None:
        url = route_request.request.url
        if url == base or url.startswith(base + "/") or url.startswith("blob:"):
            route_request.continue_()
        else:
            blocked.append(url)
            route_request.abort()

    ARTIFACTS.mkdir(exist_ok=True)
    shot = ARTIFACTS / "schema-page-figure.png"
    with sync_playwright() as playwright:
        browser = playwright.chromium.launch(executable_path=str(CHROMIUM), headless=True, args=CHROMIUM_ARGS)
        try:
            context = browser.new_context(viewport={"width": 1280, "height": 1600}, service_workers="block")
            context.route("**/*", route)
            page = context.new_page()
            page.goto(f"{base}/docs", wait_until="networkidle")
            operation = page.locator(".opblock-post").filter(
                has=page.locator(f'.opblock-summary-path[data-path="{SAMPLES}"]')
            )
            operation.locator(".opblock-summary").click()
            operation.get_by_role("button", name="Try it out").click()
            body = operation.locator("textarea.body-param__text")
            expect(body).to_be_visible()
            body.fill(json.dumps({**EXAMPLE, "options": {"figure": {"title": "Bag weights", "unit": "g"}}}, indent=2))
            # The responses' media type selector sets the Accept header of the request.
            chooser = operation.locator('.responses-table tr.response[data-code="200"] select.content-type').first
            chooser.select_option("image/svg+xml")
            with page.expect_response(lambda r: r.url == base + SAMPLES and r.request.method == "POST") as caught:
                operation.get_by_role("button", name="Execute").click()
            answer = caught.value
            assert answer.status == 200, answer.text()
            assert answer.headers["content-type"].startswith("image/svg+xml")
            assert answer.request.headers.get("accept", "").startswith("image/svg+xml")
            figure = operation.locator(".live-responses-table img.figure-answer")
            expect(figure).to_be_visible()
            page.wait_for_function(
                "element => element.complete && element.naturalWidth > 0", arg=figure.element_handle()
            )
            natural = figure.evaluate("element => [element.naturalWidth, element.naturalHeight]")
            figure.scroll_into_view_if_needed()
            page.screenshot(path=str(shot), full_page=False)
            figure.screenshot(path=str(ARTIFACTS / "schema-page-figure-only.png"))
        finally:
            browser.close()

    assert blocked == [], f"requests that would have left the machine: {blocked}"
    assert natural == [800, 600], natural  # options.figure's default size, in pixels
    image = Image.open(ARTIFACTS / "schema-page-figure-only.png").convert("L")
    histogram = image.histogram()
    dark = sum(histogram[:128]) / sum(histogram)
    # A drawn figure: many grey levels, some dark ink (axes, text, markers), mostly light ground.
    assert sum(1 for count in histogram if count) > 20, "the figure's screenshot has almost no grey levels"
    assert 0.005 < dark < 0.5, dark
    assert Image.open(shot).getextrema() != ((255, 255), (255, 255), (255, 255)), "blank screenshot"
