"""The operator page in a real headless chromium (Debian's chromium and chromedriver,
through selenium) against ``steam-edge demo``: the demo's points and a drawn trend, sign-in
with the token and an acknowledgement from the page, refused writes without a session or
with a wrong CSRF token, and the history kept by a second run on the same --state.

One demo and one browser for the whole module (the wall time of a browser start is paid
once). The screenshot lands in tests/artifacts/ (ignored by git); its path is printed."""

from __future__ import annotations

import http.client
import json
import os
import re
import shutil
import signal
import subprocess
import sys
import tempfile
import threading
import time
from pathlib import Path
from typing import Any

import pytest

from tests.integration.simkit import free_port, get_json, wait_for

pytestmark = pytest.mark.slow

CHROMIUM, CHROMEDRIVER = "/usr/bin/chromium", "/usr/bin/chromedriver"
ARTIFACTS = Path(__file__).resolve().parents[1] / "artifacts"
OPERATOR = "page-test-operator"
INK = """
    const c = document.getElementById('trend'), g = c.getContext('2d');
    const d = g.getImageData(0, 0, c.width, c.height).data; let n = 0;
    for (let i = 0; i < d.length; i += 4) if (d[i] < 60 && d[i+1] < 80 && d[i+2] > 60) n++;
    return n;"""


def _need(path: str) -> None:
    if not os.path.exists(path) and not shutil.which(os.path.basename(path)):
        if os.environ.get("CI") == "true":
            pytest.fail(f"{path} is required in CI (scripts/setup installs it)")
        pytest.skip(f"{path} is not installed")


class Demo:
    """``steam-edge demo`` as a subprocess, its output collected on a thread."""

    def __init__(self, state: Path, port: int, *extra: str) -> None:
        self.port = port
        self.proc = subprocess.Popen(
            [
                sys.executable,
                "-m",
                "edge",
                "demo",
                "--plain",
                "--listen",
                f"127.0.0.1:{port}",
                "--state",
                str(state),
                "--scenario",
                "superheat-falling",
                *extra,
            ],
            stdout=subprocess.PIPE,
            stderr=subprocess.STDOUT,
            env=dict(os.environ, TMPDIR=str(state.parent)),
        )
        self.text = ""
        threading.Thread(target=self._read, daemon=True).start()

    def _read(self) -> None:
        assert self.proc.stdout is not None
        for chunk in iter(lambda: self.proc.stdout.read1(65536), b""):  # type: ignore[union-attr]
            self.text += chunk.decode(errors="replace")

    @property
    def url(self) -> str:
        return f"http://127.0.0.1:{self.port}"

    def token(self) -> str:
        found = wait_for(lambda: re.search(r"API token  (\S+)", self.text), 120.0, "the banner")
        return found.group(1)

    def stop(self) -> None:
        if self.proc.poll() is None:
            self.proc.send_signal(signal.SIGINT)
            try:
                self.proc.wait(15)
            except subprocess.TimeoutExpired:
                self.proc.kill()
                self.proc.wait(5)


def _alarm(url: str, name: str) -> dict[str, Any]:
    return next(a for a in get_json(url + "/api/v1/alarms")["alarms"] if a["name"] == name)


@pytest.fixture(scope="module")
def state_dir():
    with tempfile.TemporaryDirectory(prefix="steam-edge-page-") as d:
        yield Path(d)


@pytest.fixture(scope="module")
def demo(state_dir):
    d = Demo(state_dir / "state.sqlite", free_port())
    try:
        d.token()
        wait_for(lambda: _alarm(d.url, "superheat-low")["unacknowledged"], 90.0, "superheat-low")
        yield d
    finally:
        d.stop()


@pytest.fixture(scope="module")
def browser(state_dir):
    _need(CHROMIUM)
    _need(CHROMEDRIVER)
    from selenium import webdriver
    from selenium.webdriver.chrome.service import Service

    options = webdriver.ChromeOptions()
    options.binary_location = CHROMIUM
    for flag in (
        "--headless",
        "--no-sandbox",
        "--disable-gpu",
        "--disable-background-networking",
        "--disable-component-update",
        "--disable-sync",
        "--no-first-run",
        "--window-size=1366,768",
        f"--user-data-dir={state_dir / 'chromium'}",
    ):
        options.add_argument(flag)
    driver = webdriver.Chrome(service=Service(CHROMEDRIVER), options=options)
    driver.set_page_load_timeout(20)
    driver.set_script_timeout(10)
    try:
        yield driver
    finally:
        driver.quit()


def _js(driver: Any, script: str) -> Any:
    return driver.execute_script(script)


def _post(port: int, path: str, headers: dict[str, str], body: Any) -> tuple[int, dict, Any]:
    conn = http.client.HTTPConnection("127.0.0.1", port, timeout=5)
    try:
        conn.request(
            "POST", path, json.dumps(body), {"Content-Type": "application/json", **headers}
        )
        r = conn.getresponse()
        return r.status, dict(r.getheaders()), json.loads(r.read() or b"null")
    finally:
        conn.close()


def test_writes_without_a_session_or_with_a_wrong_csrf_token_are_refused(demo):
    """No credentials: 401; an unknown session cookie: 403; the right cookie with no or a
    wrong X-CSRF-Token: 403; after signing out, the old cookie and token: 403; the alarm
    stays unacknowledged throughout."""
    path, alarm = "/api/v1/alarms/superheat-low/ack", {"user": "intruder"}
    status, headers, body = _post(
        demo.port, "/api/v1/session", {"Authorization": f"Bearer {demo.token()}"}, {"user": "ops"}
    )
    assert status == 200
    cookie = headers["Set-Cookie"]
    assert "HttpOnly" in cookie and "SameSite=Strict" in cookie
    session = "steamedge_session=" + re.search(r"steamedge_session=([^;]+)", cookie).group(1)
    answers = [
        _post(demo.port, path, {}, alarm)[0],
        _post(demo.port, path, {"Cookie": "steamedge_session=not-a-session"}, alarm)[0],
        _post(demo.port, path, {"Cookie": session}, alarm)[0],
        _post(demo.port, path, {"Cookie": session, "X-CSRF-Token": body["csrf"] + "x"}, alarm)[0],
    ]
    assert answers == [401, 403, 403, 403]
    assert _alarm(demo.url, "superheat-low")["unacknowledged"]
    conn = http.client.HTTPConnection("127.0.0.1", demo.port, timeout=5)
    conn.request(
        "DELETE", "/api/v1/session", headers={"Cookie": session, "X-CSRF-Token": body["csrf"]}
    )
    assert conn.getresponse().status == 200  # signed out with the right CSRF token
    conn.close()
    after = _post(demo.port, path, {"Cookie": session, "X-CSRF-Token": body["csrf"]}, alarm)
    assert after[0] == 403 and after[2]["error"] == "no_session"


def test_page_shows_the_demo_points_and_a_drawn_trend(demo, browser):
    """Every demo point in the table with a number, and a trend drawn from stored history
    (samples counted and pen pixels on the canvas); a screenshot is kept."""
    browser.get(demo.url + "/")
    names = wait_for(
        lambda: _js(
            browser,
            "return [...document.querySelectorAll('#points tbody tr')].map(r => r.dataset.point)",
        ),
        15.0,
        "the points table",
    )
    assert sorted(names) == ["condenser", "drum", "drum_b", "feedwater", "header", "superheater"]
    drum = _js(
        browser, "return document.querySelector('#points tr[data-point=drum]').cells[2].textContent"
    )
    assert 5.0 < float(drum) < 20.0  # bar a, the demo drum runs near 12
    samples = wait_for(
        lambda: (
            int(_js(browser, "return document.getElementById('trend').dataset.samples || 0") or 0)
            > 20
            or None
        ),
        20.0,
        "a drawn trend",
    )
    assert samples
    ink = wait_for(lambda: _js(browser, INK) > 100 or None, 20.0, "the pressure pen drawn")
    assert ink  # pixels of the pressure pen (dark blue) on the canvas
    time.sleep(2.5)  # a live message or two more
    ARTIFACTS.mkdir(exist_ok=True)
    shot = ARTIFACTS / "operator-page.png"
    assert browser.save_screenshot(str(shot))
    print(f"screenshot: {shot}")
    assert browser.find_element("id", "notice").is_displayed()


def test_page_shows_the_demo_flows_with_totals(demo, browser):
    """The dye-house main's two flows are listed with a mass flow in t/h and a total."""
    browser.get(demo.url + "/")
    rows = wait_for(
        lambda: _js(
            browser,
            "return [...document.querySelectorAll('#flows-table tbody tr')]"
            ".map(r => [r.dataset.flow, r.cells[2].textContent, r.cells[4].textContent])",
        ),
        15.0,
        "the flows table",
    )
    assert [r[0] for r in rows] == ["main-orifice", "main-vortex"]
    for _, tph, total in rows:
        assert 0.5 < float(tph) < 10.0  # the demo main carries a few t/h
        assert float(total) >= 0.0
    assert browser.find_element("id", "flows-box").is_displayed()


def test_the_page_fits_a_laptop_and_a_tablet_without_sideways_scrolling(demo, browser):
    """At 1366x768 and at a 1024x768 tablet the page is no wider than the window and the
    advisory notice stays on screen; a full-length screenshot of each is kept."""
    try:
        for width, name in ((1366, "laptop"), (1024, "tablet")):
            browser.set_window_size(width, 768)
            browser.get(demo.url + "/")
            wait_for(
                lambda: (
                    int(
                        _js(browser, "return document.getElementById('trend').dataset.samples || 0")
                        or 0
                    )
                    > 20
                    or None
                ),
                20.0,
                "a trend",
            )
            sizes = _js(
                browser,
                "const e = document.documentElement;"
                "return [e.scrollWidth, e.clientWidth, e.scrollHeight];",
            )
            assert sizes[0] <= sizes[1], (name, sizes)
            notice = browser.find_element("id", "notice").rect
            assert notice["y"] + notice["height"] <= 768 and notice["x"] >= 0
            browser.set_window_size(width, min(2400, sizes[2] + 140))
            time.sleep(0.5)
            shot = ARTIFACTS / f"operator-page-{name}-full.png"
            assert browser.save_screenshot(str(shot))
            print(f"screenshot: {shot}")
    finally:
        browser.set_window_size(1366, 768)


def test_sign_in_and_acknowledge_from_the_page(demo, browser):
    """Sign in with the token, press Ack on superheat-low: the API shows it acknowledged
    and the journal has the acknowledgement with the operator's name."""
    browser.get(demo.url + "/")
    wait_for(lambda: browser.find_element("id", "signin").is_displayed() or None, 10.0, "sign in")
    browser.find_element("id", "signin").click()
    browser.find_element("id", "signin-user").send_keys(OPERATOR)
    browser.find_element("id", "signin-token").send_keys(demo.token())
    browser.find_element("id", "signin-go").click()
    wait_for(lambda: OPERATOR in browser.find_element("id", "user").text or None, 10.0, "signed in")
    cookies = {c["name"]: c for c in browser.get_cookies()}
    assert cookies["steamedge_session"]["httpOnly"] is True
    assert cookies["steamedge_session"]["sameSite"] == "Strict"
    ack = wait_for(
        lambda: _js(
            browser,
            "const r = document.querySelector('#alarms tr[data-alarm=\"superheat-low\"]');"
            "return r && [...r.querySelectorAll('button')]"
            ".find(b => b.textContent === 'Ack' && !b.disabled);",
        ),
        15.0,
        "an enabled Ack button",
    )
    ack.click()
    wait_for(lambda: not _alarm(demo.url, "superheat-low")["unacknowledged"] or None, 10.0, "ack")
    events = get_json(demo.url + "/api/v1/events?limit=1000")["events"]
    acks = [e for e in events if e["alarm"] == "superheat-low" and e["kind"] == "acknowledged"]
    assert len(acks) == 1 and acks[0]["user"] == OPERATOR


def test_the_page_is_served_with_a_strict_content_security_policy(demo):
    """GET / carries a CSP allowing only this origin's script, style and connections."""
    conn = http.client.HTTPConnection("127.0.0.1", demo.port, timeout=5)
    conn.request("GET", "/")
    r = conn.getresponse()
    r.read()
    conn.close()
    csp = r.getheader("Content-Security-Policy")
    assert "default-src 'none'" in csp and "script-src 'self'" in csp
    assert "unsafe-inline" not in csp and "frame-ancestors 'none'" in csp


def test_the_demo_prints_the_page_url_first(demo):
    """The banner's first line is the operator page's URL."""
    demo.token()
    banner = demo.text.split("steam-edge demo: Kestrel", 1)[0].strip().splitlines()
    assert banner[-1].startswith(f"operator page: {demo.url}/")


def test_a_second_demo_run_on_the_same_state_keeps_the_history(demo, state_dir):
    """Stop the demo, run it again with the same --state: the first run's window reads back."""
    until = time.time()
    query = f"/api/v1/history?point=drum&quantity=pressure&since=-2m&until={until:.0f}"
    query = query.replace(
        f"until={until:.0f}", "until=" + time.strftime("%Y-%m-%dT%H:%M:%SZ", time.gmtime(until))
    )
    before = get_json(demo.url + query)["series"][0]["samples"]
    demo.stop()
    again = Demo(state_dir / "state.sqlite", free_port(), "--duration", "30")
    try:
        again.token()
        q2 = query.replace(
            "since=-2m", "since=" + time.strftime("%Y-%m-%dT%H:%M:%SZ", time.gmtime(until - 120))
        )
        after = wait_for(lambda: get_json(again.url + q2)["series"][0]["samples"], 20.0, "history")
    finally:
        again.stop()
    assert len(before) > 10
    assert [s["time"] for s in after] == [
        s["time"] for s in before if s["time"] >= after[0]["time"]
    ]
