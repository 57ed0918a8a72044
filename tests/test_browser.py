"""A real browser on a served dashboard: `cablekit serve`, headless Debian chromium, playwright.

Starts ``cablekit serve explore_layout`` on a free loopback port, opens it in headless
chromium (no browser download: ``/usr/bin/chromium``), blocks every request that does not go
to this machine, moves the footprint-width slider of the layout editor with the keyboard and
checks that the rig view's exit points and cable tensions, the workspace summary and the
workspace map's data change; then types a frame height that makes the design invalid and checks that the
validation message appears while the numbers stay.  A screenshot is saved under artifacts/.
The server is stopped by its PID.
"""

from __future__ import annotations

import os
import re
import signal
import socket
import subprocess
import sys
import threading
import time
from pathlib import Path

import pytest

CHROMIUM = "/usr/bin/chromium"
ROOT = Path(__file__).resolve().parents[1]
ARTIFACTS = ROOT / "artifacts"
# flags measured to work here (see the shared tooling notes): no GPU, no network side traffic
ARGS = ["--headless", "--no-sandbox", "--disable-gpu", "--disable-quic", "--no-first-run",
        "--disable-background-networking", "--disable-component-update", "--disable-sync"]
LOAD_TIMEOUT = 150_000  # [ms] page + kernel + widgets on a busy 2-core machine



def _free_port() -> int:
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        return s.getsockname()[1]


def _cablekit_command() -> list[str]:
    exe = Path(sys.executable).with_name("cablekit")
    return [str(exe)] if exe.exists() else [sys.executable, "-m", "cablekit"]


@pytest.fixture(scope="module")
def sync_playwright():
    if not os.path.exists(CHROMIUM):
        pytest.skip(f"{CHROMIUM} is missing (install Debian's chromium: apt-get install -y chromium)")
    mod = pytest.importorskip("playwright.sync_api", reason="python playwright is not installed")
    return mod.sync_playwright


@pytest.fixture()
def server(tmp_path):
    """`cablekit serve` on a free loopback port; yields (url, process, output lines)."""
    port = _free_port()
    env = dict(os.environ, CABLEKIT_CACHE_DIR=os.environ.get("CABLEKIT_CACHE_DIR", str(tmp_path / "cache")))
    proc = subprocess.Popen([*_cablekit_command(), "serve", "explore_layout", "--port", str(port)],
                            cwd=ROOT, stdout=subprocess.PIPE, stderr=subprocess.DEVNULL, text=True, env=env)
    lines: list[str] = []
    reader = threading.Thread(target=lambda: lines.extend(iter(proc.stdout.readline, "")), daemon=True)
    reader.start()
    url = None
    end = time.monotonic() + 90
    while time.monotonic() < end and proc.poll() is None:
        found = [m.group(0) for line in list(lines) if (m := re.search(r"http://127\.0\.0\.1:\d+/\S*", line))]
        if found:
            url = found[0]
            break
        time.sleep(0.2)
    try:
        assert url is not None, f"cablekit serve printed no address (exit code {proc.poll()}): {lines}"
        assert f":{port}/" in url
        yield url, proc, lines
    finally:
        if proc.poll() is None:
            proc.send_signal(signal.SIGTERM)  # stop it by its PID; it stops Voila and the kernels
            try:
                proc.wait(timeout=30)
            except subprocess.TimeoutExpired:
                proc.kill()
                proc.wait(timeout=10)
        reader.join(timeout=5)


_STATE_JS = """() => {
  const share = document.querySelector('.ck-ws-share');
  const sum = (a) => { let s = 0; const walk = (v) => { if (v == null) return;
      if (typeof v === 'number') { if (isFinite(v)) s += v; } else for (const x of v) walk(x); }; walk(a); return s; };
  const map = document.querySelector('.ck-workspace-map .js-plotly-plot');
  const rig = document.querySelector('.ck-rig-view .js-plotly-plot');
  const hm = map && map._fullData && map._fullData[0];
  const exits = rig && rig._fullData && rig._fullData[1];
  return {
    share: share ? share.textContent : null,
    summary: (document.querySelector('.ck-ws-summary') || {}).textContent || null,
    tensions: Array.from(document.querySelectorAll('.ck-rig-summary td:nth-child(2)')).map(td => td.textContent),
    map_sum: hm && hm.z ? sum(hm.z) : null,
    map_title: map && map._fullLayout ? map._fullLayout.title.text : null,
    exit_x: exits && exits.x ? Array.from(exits.x) : null,
    problems: (document.querySelector('.ck-problems') || {}).textContent || '',
  };
}"""


def _wait_for(page, predicate, timeout_s: float, what: str):
    end = time.monotonic() + timeout_s
    state = None
    while time.monotonic() < end:
        state = page.evaluate(_STATE_JS)
        if predicate(state):
            return state
        page.wait_for_timeout(500)
    raise AssertionError(f"timed out waiting for {what}; last page state: {state}")


@pytest.mark.browser
@pytest.mark.slow
def test_dashboard_in_a_real_browser(sync_playwright, server):
    url, proc, lines = server
    ARTIFACTS.mkdir(exist_ok=True)
    blocked: list[str] = []

    def route(r):
        u = r.request.url
        if u.startswith(("http://127.0.0.1", "ws://127.0.0.1", "data:", "blob:")):
            r.continue_()
        else:
            blocked.append(u)
            r.abort()

    with sync_playwright() as p:
        browser = p.chromium.launch(executable_path=CHROMIUM, args=ARGS)
        try:
            page = browser.new_page(viewport={"width": 1500, "height": 1300})
            page.route("**/*", route)
            page.goto(url, timeout=LOAD_TIMEOUT)
            before = _wait_for(page, lambda s: s["share"] and s["map_sum"] is not None and s["exit_x"],
                               LOAD_TIMEOUT / 1000, "the dashboard to render")
            assert re.fullmatch(r"\d+(\.\d)? %", before["share"].strip())

            # the footprint-width slider (first slider of the layout editor): keyboard steps of 50 mm
            handle = page.locator(".ck-layout-editor .ck-slider .noUi-handle").first
            handle.focus()
            for _ in range(8):
                handle.press("ArrowRight")
            width_before = max(before["exit_x"]) - min(before["exit_x"])

            def widened(s):  # every key press arrived: the frame is 8 steps of 0.05 m wider
                return s["exit_x"] and abs(max(s["exit_x"]) - min(s["exit_x"]) - width_before - 0.4) < 1e-6

            _wait_for(page, widened, 60, "the rig view to show the wider frame")
            after = _wait_for(page, lambda s: s["tensions"] != before["tensions"] and s["summary"] != before["summary"]
                              and s["map_sum"] != before["map_sum"], 60,
                              "the tensions, the workspace summary and the workspace map to change")
            assert all(re.fullmatch(r"\d+\.\d", t) for t in after["tensions"]) and len(after["tensions"]) == 3
            assert widened(after)

            # an invalid edit: the frame height typed below the task box; message shown, numbers kept
            height = page.locator(".ck-layout-editor .ck-slider").nth(2).locator(".widget-readout")
            height.click()
            page.keyboard.press("Control+A")
            page.keyboard.type("0.5")
            page.keyboard.press("Enter")
            invalid = _wait_for(page, lambda s: "task.box_upper" in s["problems"], 60, "the validation message")
            for key in ("share", "summary", "tensions", "map_sum"):
                assert invalid[key] == after[key], key
            page.set_viewport_size({"width": 1500, "height": 2600})  # the page scrolls inside; show it all
            page.wait_for_timeout(1500)
            page.screenshot(path=str(ARTIFACTS / "browser_dashboard.png"))
        finally:
            browser.close()
    assert all(not u.startswith(("http://127.0.0.1", "ws://127.0.0.1")) for u in blocked)

    proc.send_signal(signal.SIGINT)  # Ctrl-C, sent to the server's PID
    assert proc.wait(timeout=30) == 0
    time.sleep(0.2)
    assert any("stopping" in line for line in lines)
    port = int(re.search(r":(\d+)/", url).group(1))
    with pytest.raises(OSError):  # Voila is gone with it: nothing listens any more
        socket.create_connection(("127.0.0.1", port), timeout=2).close()
    assert (ARTIFACTS / "browser_dashboard.png").stat().st_size > 10_000


# --------------------------------------------------------------------------------------
# `cablekit serve` without a browser
# --------------------------------------------------------------------------------------
def test_serve_finds_notebooks_by_name_and_refuses_unknown_ones():
    from cablekit.cli import InputError
    from cablekit.commands.serve import find_notebook

    assert find_notebook("review") == ROOT / "notebooks" / "review.ipynb"
    with pytest.raises(InputError, match="explore_layout"):
        find_notebook("no_such_dashboard")


def test_serve_needs_a_token_beyond_this_machine_and_a_free_port():
    from cablekit.cli import InputError
    from cablekit.commands.serve import _free_port, _is_loopback

    assert _is_loopback("127.0.0.1") and _is_loopback("::1") and _is_loopback("localhost")
    assert not _is_loopback("0.0.0.0") and not _is_loopback("192.168.1.20")
    with pytest.raises(InputError):
        _is_loopback("not-an-address")
    with socket.socket() as busy:
        busy.bind(("127.0.0.1", 0))
        busy.listen()
        with pytest.raises(InputError, match="not available"):
            _free_port("127.0.0.1", busy.getsockname()[1])


def test_serve_design_option_rewrites_only_a_copy(tmp_path):
    import nbformat

    from cablekit.commands.serve import parameterised_copy

    original = ROOT / "notebooks" / "explore_layout.ipynb"
    before = original.read_bytes()
    design = ROOT / "examples" / "hall_sander_8cable.toml"
    copy = parameterised_copy(original, tmp_path, {"DESIGN": design, "DESIGN_FOLDER": design.parent})
    nb = nbformat.read(copy, as_version=4)
    params = [c for c in nb.cells if "parameters" in c.metadata.get("tags", [])][0]
    assert params.source == f"DESIGN = {str(design)!r}\nDESIGN_FOLDER = {str(design.parent)!r}\n"
    assert original.read_bytes() == before


def test_serve_with_a_broken_design_gives_the_validation_list(tmp_path):
    bad = tmp_path / "bad.toml"
    bad.write_text('format = "cablekit-design/1"\n[meta]\nname = "x"\n')
    out = subprocess.run([*_cablekit_command(), "serve", "--design", str(bad), "--port", "0"], cwd=ROOT,
                         capture_output=True, text=True, timeout=120)
    assert out.returncode == 3
    assert "problems in the design" in out.stderr and "frame" in out.stderr


@pytest.mark.slow
def test_serving_beyond_this_machine_requires_the_token(tmp_path):
    import urllib.error
    import urllib.request

    class NoRedirect(urllib.request.HTTPRedirectHandler):
        def redirect_request(self, *args, **kwargs):
            return None

    opener = urllib.request.build_opener(NoRedirect)
    env = dict(os.environ, CABLEKIT_CACHE_DIR=os.environ.get("CABLEKIT_CACHE_DIR", str(tmp_path / "cache")))
    proc = subprocess.Popen([*_cablekit_command(), "serve", "review", "--ip", "0.0.0.0", "--port", "0"], cwd=ROOT,
                            stdout=subprocess.PIPE, stderr=subprocess.DEVNULL, text=True, env=env)
    try:
        line = ""
        end = time.monotonic() + 90
        while "http://" not in line and time.monotonic() < end and proc.poll() is None:
            line = proc.stdout.readline()
        url = re.search(r"http://\S+", line).group(0)
        token = re.search(r"\?token=([\w-]{20,})$", url).group(1)  # one was generated and printed
        base = url.split("?")[0]
        for bad in (base, f"{base}?token=wrong"):
            with pytest.raises(urllib.error.HTTPError) as err:
                opener.open(bad, timeout=30)
            assert err.value.code in (302, 403) and "login" in err.value.headers.get("Location", "/login")
        with opener.open(f"{base}?token={token}", timeout=60) as response:  # headers only, page streams
            assert response.status == 200
    finally:
        proc.send_signal(signal.SIGINT)
        try:
            assert proc.wait(timeout=30) == 0
        finally:
            if proc.poll() is None:
                proc.kill()
