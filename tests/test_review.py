"""The design-review sheet: contents, numbers, failures, determinism, browser, PDF, command line."""

from __future__ import annotations

import json
import re
import shutil
import subprocess
import sys
import types
from dataclasses import replace
from html.parser import HTMLParser

import numpy as np
import pytest

from cablekit import checks as checks_mod
from cablekit import review
from cablekit.checks import FAIL, PASS, WARN, Check, run_all
from cablekit.cli import EXIT_CHECK_FAILED, EXIT_INVALID, EXIT_OK, main
from cablekit.design import content_hash
from cablekit.kinematics import cable_lengths, length_per_count
from cablekit.region import task_poses
from cablekit.review import LatexError, build_review, latex_to_mathml, write_review
from cablekit.statics import tension_limits

from conftest import EXAMPLES

DATE = "2031-04-05"
CHROMIUM = "/usr/bin/chromium"
GREENHOUSE = EXAMPLES / "greenhouse_tray_3cable.toml"


# --------------------------------------------------------------------------------------
# helpers
# --------------------------------------------------------------------------------------
class _Rows(HTMLParser):
    """Collects every row of ``<table class="checks">``: its attributes, the text of each cell,
    and the text of its ``detail`` and ``source`` parts."""

    def __init__(self):
        super().__init__()
        self.rows: list[tuple[dict, list[str], dict]] = []
        self._in_table = False
        self._row = None
        self._cell = None
        self._part = None

    def handle_starttag(self, tag, attrs):
        a = dict(attrs)
        if tag == "table" and a.get("class") == "checks":
            self._in_table = True
        elif self._in_table and tag == "tr" and "data-key" in a:
            self._row = (a, [], {})
        elif self._row is not None and tag == "td":
            self._cell = []
        elif self._row is not None and tag == "div" and a.get("class") in ("detail", "source"):
            self._part = a["class"]
            self._row[2][self._part] = ""

    def handle_endtag(self, tag):
        if tag == "table":
            self._in_table = False
        elif tag == "div":
            self._part = None
        elif tag == "td" and self._row is not None and self._cell is not None:
            self._row[1].append("".join(self._cell).strip())
            self._cell = None
        elif tag == "tr" and self._row is not None:
            self.rows.append(self._row)
            self._row = None

    def handle_data(self, data):
        if self._cell is not None:
            self._cell.append(data)
        if self._part is not None:
            self._row[2][self._part] += data


def check_rows(doc: str):
    p = _Rows()
    p.feed(doc)
    return p.rows


def _pdf_image_widths(reader) -> list[bool]:
    """For every image XObject of the PDF: is it at least 600 px wide (a plot, not an icon)?"""
    out = []
    for page in reader.pages:
        xobjects = (page.get("/Resources") or {}).get("/XObject") or {}
        for ref in xobjects.values():
            obj = ref.get_object()
            if obj.get("/Subtype") == "/Image":
                out.append(int(obj["/Width"]) >= 600)
    return out


def results_of(sheet):
    return {k: v for p in sheet.parts for k, v in p.options.items()}


@pytest.fixture(scope="module")
def sheet(greenhouse):
    return build_review(greenhouse, source_path="examples/greenhouse_tray_3cable.toml", date=DATE)


_FAKE_CHECKS = [
    Check("fake_pass", "winch 1", "fake passing check", 1.0, 2.0, "N", 1.0, PASS, "fake source A, clause 1"),
    Check("fake_warn", "cable post B", "fake warning check", 1.9, 2.0, "N", 0.1, WARN,
          "common practice, no source", "close to its limit"),
    Check("fake_fail", "task region", "fake failing check", 3.5, 2.0, "N", -1.5, FAIL,
          "fake standard B, table 7", "cable post C over its limit at x = 1.2 m"),
]


def _install_fake(monkeypatch, checks, *, alone: bool):
    mod = types.ModuleType("ck_fake_provider")
    mod.design_checks = lambda design, **options: list(checks)
    monkeypatch.setitem(sys.modules, "ck_fake_provider", mod)
    providers = [] if alone else list(checks_mod.CHECK_PROVIDERS)
    monkeypatch.setattr(checks_mod, "CHECK_PROVIDERS", [*providers, "ck_fake_provider:design_checks"])
    if alone:  # no analysis module: a quick sheet for testing the command line's exit codes
        monkeypatch.setattr(review, "_analysis_parts", lambda: [])


@pytest.fixture()
def fake_provider(monkeypatch):
    """Every installed provider plus one owning a passing, a warning and a failing check."""
    _install_fake(monkeypatch, _FAKE_CHECKS, alone=False)


@pytest.fixture()
def only_fake(monkeypatch):
    """Only the fake provider (no analysis modules): ``only_fake(checks)`` chooses its checks."""
    return lambda checks: _install_fake(monkeypatch, checks, alone=True)


def _num(v):
    return review._num(v)


# --------------------------------------------------------------------------------------
# LaTeX -> MathML
# --------------------------------------------------------------------------------------
def test_mathml_structure_of_small_equations():
    # element names and nesting per W3C MathML Core (2023), sections 3.1-3.4
    assert latex_to_mathml(r"\frac{a}{b}") == '<math display="block"><mrow><mfrac><mrow><mi>a</mi></mrow>' \
                                              '<mrow><mi>b</mi></mrow></mfrac></mrow></math>'
    assert "<msubsup><mi>x</mi><mrow><mi>i</mi></mrow><mrow><mn>2</mn></mrow></msubsup>" in latex_to_mathml("x_{i}^{2}")
    assert "<msqrt>" in latex_to_mathml(r"\sqrt{x}")
    m = latex_to_mathml(r"\left[\begin{matrix}a & b\\c & d\end{matrix}\right]")
    assert m.count("<mtr>") == 2 and m.count("<mtd>") == 4
    assert "≤" in latex_to_mathml(r"t \le 1") and "ψ" in latex_to_mathml(r"\cos{\left(\psi \right)}")
    assert 'class="bf"' in latex_to_mathml(r"\mathbf{u}_i")
    assert "<mtext>translation part</mtext>" in latex_to_mathml(r"\;(\text{translation part})")


def test_mathml_rejects_what_it_does_not_know():
    with pytest.raises(LatexError, match=r"\\foo"):
        latex_to_mathml(r"\foo{x}")
    with pytest.raises(LatexError):
        latex_to_mathml(r"\frac{a}{b")
    with pytest.raises(LatexError):
        latex_to_mathml(r"\begin{matrix}a\end{pmatrix}")


def test_every_library_equation_converts():
    from cablekit.symbolic import latex_equations

    for name, tex in latex_equations("point").items():
        m = latex_to_mathml(tex)
        assert "\\" not in m, name  # no LaTeX command left unconverted
        assert m.count("<mrow") == m.count("</mrow>") and m.count("<mfrac>") == m.count("</mfrac>")


def test_very_long_equations_keep_their_short_form():
    long_rhs = " + ".join(f"x_{{{k}}}^{{2}}" for k in range(200))
    tex = r"L_i = \lVert \mathbf{l}_i \rVert = \sqrt{" + long_rhs + "}"
    shown = review._typeset_part(tex)
    assert shown.startswith(r"L_i = \lVert \mathbf{l}_i \rVert =") and "expanded" in shown and "x_{199}" not in shown
    assert review._typeset_part(r"a = \frac{b}{c}") == r"a = \frac{b}{c}"
    assert review._typeset_part("x + " * 400 + "y") is None  # no '=': nothing short to show
    # '=' inside braces or \left..\right pairs does not split
    assert review._split_top_level(r"a = \frac{b=c}{d} = \left(x = y\right)") == \
        ["a ", r" \frac{b=c}{d} ", r" \left(x = y\right)"]


# --------------------------------------------------------------------------------------
# contents
# --------------------------------------------------------------------------------------
def test_sheet_has_every_section(sheet, greenhouse):
    doc = sheet.html
    for anchor in ("scenario", "inputs", "derived", "checks", "plots", "equations", "practice", "assumptions",
                   "safety", "signoff"):
        assert f'<section id="{anchor}">' in doc
    assert greenhouse.meta.scenario[:40] in doc and greenhouse.meta.job[:40] in doc
    # inputs with units
    d, w = greenhouse, greenhouse.winches[0]
    for text in (f"{_num(d.cable.diameter * 1e3)} mm", f"{_num(d.cable.breaking_force / 1e3)} kN",
                 f"{_num(d.cable.axial_stiffness / 1e3)} kN", f"{_num(w.drum_diameter * 1e3)} mm",
                 f"{_num(w.motor_rated_torque)} N·m", f"{_num(w.motor_rated_speed * 60 / (2 * np.pi))} rpm",
                 f"{_num(w.count_rate_limit / 1e3)} kHz", f"{_num(d.platform.mass)} kg", f"{_num(d.payload.mass)} kg"):
        assert text in doc, text
    # safety cautions, deferral to codes, the hash, the version and the sign-off block
    assert "out from under" in doc and "brakes" in doc and "emergency stop" in doc and "Inspect ropes" in doc
    assert "Local codes" in doc and "licensed engineer" in doc
    assert content_hash(greenhouse) in doc and sheet.content_hash == content_hash(greenhouse)
    assert f"cablekit {review.__version__}" in doc
    assert "Approved by" in doc and "signature" in doc
    # the practice table with its sources
    from cablekit.practice import PRACTICE

    for key, entry in PRACTICE.items():
        assert f"<code>{key}</code>" in doc and review._h(entry.source) in doc
    # assumptions and what was not checked
    assert "Exit points are fixed" in doc and "Quasi-static" in doc and "Not checked" in doc


def test_every_check_appears_with_its_source(sheet, greenhouse):
    again = run_all(greenhouse, **results_of(sheet))
    assert [c.key for c in again] == [c.key for c in sheet.checks]
    rows = check_rows(sheet.html)
    assert len(rows) == len(sheet.checks)
    for c, (attrs, cells, parts) in zip(sheet.checks, rows):
        assert attrs["data-key"] == c.key and attrs["data-status"] == c.status
        assert cells[1] == c.status.upper() and cells[2] == c.title + c.subject
        unit = f" {review._unit(c.unit)}" if review._unit(c.unit) else ""
        assert cells[3:6] == [_num(c.value) + unit, _num(c.limit) + unit, _num(c.margin) + unit]
        assert parts.get("detail", "") == c.detail and parts["source"] == f"source: {c.source}" and c.source
    assert sheet.status == checks_mod.worst_status(sheet.checks)
    # the practice table names the checks that cite each entry's source
    from cablekit.practice import PRACTICE

    table = sheet.html.split('<table class="practice">', 1)[1].split("</table>", 1)[0]
    for key, entry in PRACTICE.items():
        row = table.split(f"<code>{key}</code>", 1)[1].split("</tr>", 1)[0]
        for c in sheet.checks:
            if entry.source in c.source:
                assert review._h(c.title) in row, (key, c.title)


def test_missing_modules_are_said_plainly(sheet):
    for p in sheet.parts:
        section = sheet.html.split(f'id="part-{p.key}"', 1)[1].split("<h3", 1)[0]
        if p.available:
            assert "Not checked." not in section
        else:
            assert "Not checked." in section and p.module in section
            assert p.module in sheet.missing
    if sheet.missing:
        assert "Incomplete:" in sheet.html


def test_failing_checks_show_fail_and_the_reason(greenhouse, sheet, fake_provider):
    s = build_review(greenhouse, date=DATE, results=results_of(sheet))
    assert [c.key for c in s.checks[-3:]] == ["fake_pass", "fake_warn", "fake_fail"]
    assert s.status == FAIL
    assert s.failures[-1].key == "fake_fail" and s.warnings[-1].key == "fake_warn"
    banner = s.html.split('id="overall"', 1)[1].split('<table class="kv">', 1)[0]
    assert f"FAIL: {len(s.failures)} of {len(s.checks)} checks fail" in banner and "What fails and why" in banner
    k = len(s.checks)  # the fake failing check is the last one: the banner links to its row
    assert "cable post C over its limit at x = 1.2 m" in banner and f'href="#check-{k}"' in banner
    rows = {a["data-key"]: (a, cells, parts) for a, cells, parts in check_rows(s.html)}
    attrs, cells, parts = rows["fake_fail"]
    assert "fail" in attrs["class"] and cells[1] == "FAIL" and "over its limit" in parts["detail"]
    assert rows["fake_pass"][2]["source"] == "source: fake source A, clause 1"


def test_a_real_design_that_fails_a_check(greenhouse):
    """A payload far beyond what the winch motors hold fails at least one library check."""
    assert run_all(greenhouse), "no module that owns checks answered: the check providers are broken"
    heavy = greenhouse.with_changes(payload=replace(greenhouse.payload, mass=25.0))
    s = build_review(heavy, date=DATE)
    assert s.status == FAIL and s.failures
    rows = {a["data-key"] + "|" + cells[2]: (cells, parts) for a, cells, parts in check_rows(s.html)}
    for c in s.failures:
        cells, parts = rows[c.key + "|" + c.title + c.subject]
        assert cells[1] == "FAIL" and parts["source"] == f"source: {c.source}" and parts.get("detail", "") == c.detail
        assert c.title in s.html.split('id="overall"', 1)[1].split("</header>", 1)[0]


def test_user_text_is_escaped(greenhouse, sheet):
    evil = greenhouse.with_changes(meta=replace(greenhouse.meta, name="<script>alert(1)</script> & co",
                                                job='say "hi" <b>'))
    doc = build_review(evil, date=DATE, results=results_of(sheet)).html
    assert "<script>alert(1)" not in doc and "&lt;script&gt;alert(1)&lt;/script&gt; &amp; co" in doc
    assert "<b>'" not in doc


# --------------------------------------------------------------------------------------
# numbers: the sheet shows the library's numbers, and they agree with hand formulas
# --------------------------------------------------------------------------------------
def test_numbers_equal_the_library(sheet, greenhouse):
    d = greenhouse
    L = cable_lengths(d, task_poses(d).poses)
    lpc = length_per_count(d)
    lim = tension_limits(d)
    for i, n in enumerate(d.cable_names):
        q = sheet.quantity(f"cable_length:{n}")
        assert (q.low, q.high) == (L[:, i].min(), L[:, i].max())
        assert sheet.quantity(f"length_per_count:{n}").low == lpc[i]
        assert sheet.quantity(f"t_max:{n}").low == lim.t_max[i]
        # ... and the HTML prints exactly those values
        for key in (f"cable_length:{n}", f"length_per_count:{n}", f"t_max:{n}"):
            assert f'<span data-key="{key}">{sheet.quantity(key).display()}</span>' in sheet.html
    # encoder resolution by hand: pi (D_drum + d_rope) / (gear * lines * decoding), the rope
    # centreline on the pitch diameter (Shigley's Mechanical Engineering Design, 10th ed., 2015, sec. 17-6)
    assert sheet.quantity("length_per_count:post A").low == pytest.approx(np.pi * 0.052 / (5 * 100 * 4), rel=1e-12)
    assert "81.68" in sheet.quantity("length_per_count:post A").display()


def test_tension_range_matches_hand_statics(sheet, greenhouse):
    """3 cables, 3 DOF: the tensions are the unique solution of sum t_i u_i = M g e_z.

    Equilibrium of a point mass on three cables (Pott, Cable-Driven Parallel Robots, Springer
    2018, ch. 3, the structure matrix of a point platform); solved here by numpy.linalg.solve.
    """
    d = greenhouse
    p = task_poses(d).poses
    u = d.exits[None, :, :] - p[:, None, :]
    u /= np.linalg.norm(u, axis=2, keepdims=True)
    weight = d.total_mass * d.frame.g
    t = np.linalg.solve(np.transpose(u, (0, 2, 1)), np.broadcast_to([0.0, 0.0, weight], p.shape)[..., None])[..., 0]
    lim = tension_limits(d)
    ok = np.all((t >= lim.t_min) & (t <= lim.t_max), axis=1)
    ws = results_of(sheet).get("workspace")
    if ws is not None:  # the sheet takes the range over the workspace's feasible poses (tensions and geometry)
        assert np.array_equal(ws.poses, p)
        assert np.all(ok[ws.feasible])
        ok = ws.feasible
    for i, n in enumerate(d.cable_names):
        q = sheet.quantity(f"tension:{n}")
        # rtol: two different linear solvers on well-conditioned 3x3 systems
        assert q.low == pytest.approx(t[ok, i].min(), rel=1e-9)
        assert q.high == pytest.approx(t[ok, i].max(), rel=1e-9)


# --------------------------------------------------------------------------------------
# offline and deterministic
# --------------------------------------------------------------------------------------
def test_offline_and_plotly_inlined_once(sheet):
    from plotly.offline import get_plotlyjs

    doc = sheet.html
    js = get_plotlyjs()
    assert doc.count(js[:200]) == 1
    assert not re.search(r"<script[^>]+src=", doc) and "<link" not in doc
    assert "mathjax" not in doc.split(js, 1)[1].lower()  # no CDN maths: equations are MathML
    assert doc.count("<math ") >= 5
    ids = re.findall(r'<div id="(fig-[^"]+)" class="plot"', doc)
    assert ids and len(ids) == len(set(ids)) and all(re.fullmatch(r"fig-[a-z]+-\d+", i) for i in ids)
    assert len(ids) == sum(len(p.figures) for p in sheet.parts)
    for i in ids:  # each plot's figure is there as JSON that parses
        spec = doc.split(f'<script type="application/json" id="{i}-data">', 1)[1].split("</script>", 1)[0]
        assert json.loads(spec)["data"]
    assert "displayModeBar: false" in doc


def test_same_design_same_sheet_apart_from_the_date(sheet, greenhouse):
    # computed afresh (no results handed over): every module's result must be reproducible
    other = build_review(greenhouse, source_path="examples/greenhouse_tray_3cable.toml", date="1999-12-31")
    assert other.html != sheet.html
    assert other.html.replace("1999-12-31", DATE) == sheet.html
    assert sheet.html.count(DATE) == 2  # the header and the footer


def test_write_review_is_atomic(tmp_path, greenhouse, monkeypatch):
    out = tmp_path / "r.html"
    out.write_text("previous sheet")

    def broken(*a, **k):
        raise RuntimeError("boom")

    monkeypatch.setattr(review, "_render", broken)
    with pytest.raises(RuntimeError, match="boom"):
        write_review(greenhouse, out, date=DATE)
    assert out.read_text() == "previous sheet"
    assert [p.name for p in tmp_path.iterdir()] == ["r.html"]


# --------------------------------------------------------------------------------------
# a real browser and the PDF
# --------------------------------------------------------------------------------------
needs_chromium = pytest.mark.skipif(not shutil.which(CHROMIUM), reason="Debian chromium not installed")


@pytest.mark.browser
@pytest.mark.slow
@needs_chromium
def test_html_renders_in_headless_chromium(tmp_path, sheet, artifacts_dir):
    sync_api = pytest.importorskip("playwright.sync_api")
    path = tmp_path / "review.html"
    path.write_text(sheet.html, encoding="utf-8")
    outside, errors = [], []
    with sync_api.sync_playwright() as p:
        browser = p.chromium.launch(executable_path=CHROMIUM, args=[
            "--headless", "--no-sandbox", "--disable-gpu", "--disable-quic", "--no-first-run",
            "--disable-background-networking", "--disable-component-update", "--disable-sync"])
        try:
            page = browser.new_page(viewport={"width": 1000, "height": 1300})
            page.on("pageerror", lambda e: errors.append(str(e)))

            def route(r):
                if r.request.url.startswith("file:"):
                    r.continue_()
                else:
                    outside.append(r.request.url)
                    r.abort()

            page.route("**/*", route)
            page.goto(path.as_uri())
            page.wait_for_selector("body[data-plots]", timeout=60_000)
            plots_state = page.get_attribute("body", "data-plots")
            n_plots = page.eval_on_selector_all("div.plot", "els => els.length")
            rendered = page.eval_on_selector_all("div.plot", "els => els.filter(e => e.querySelector('.main-svg')).length")
            modebars = page.eval_on_selector_all(".modebar", "els => els.filter(e => e.offsetParent !== null).length")
            math_width = page.eval_on_selector_all("math", "els => Math.min(...els.map(e => e.getBoundingClientRect().width))")
            banner = page.inner_text("#overall")
            page.screenshot(path=str(artifacts_dir / "review_greenhouse.png"), full_page=True)
        finally:
            browser.close()
    assert not errors and not outside and plots_state == "ready"
    assert n_plots == sum(len(p.figures) for p in sheet.parts) and rendered == n_plots and modebars == 0
    assert math_width > 5  # MathML laid out, not left as raw text of zero width
    assert banner.strip()
    assert (artifacts_dir / "review_greenhouse.png").stat().st_size > 10_000


@pytest.mark.browser
@pytest.mark.slow
@needs_chromium
def test_pdf_opens_and_has_pages(tmp_path, greenhouse):
    pypdf = pytest.importorskip("pypdf")
    html_path, pdf_path = tmp_path / "out" / "r.html", tmp_path / "out" / "r.pdf"
    # a coarser task grid: fewer points in the 3-D plots keep the browser's work short
    coarse = greenhouse.with_changes(task=replace(greenhouse.task, step=0.15))
    s = write_review(coarse, html_path, pdf=pdf_path, date=DATE)
    reader = pypdf.PdfReader(str(pdf_path))
    assert len(reader.pages) >= 4
    text = "".join(page.extract_text() for page in reader.pages)
    flat = re.sub(r"\s+", "", text)
    assert "Designreview" in flat and "Approvedby(responsibleengineer)" in flat and s.content_hash in flat
    assert "Suspendedloadsandstoredenergy" in flat
    # every WebGL (3-D) plot went in as a printed image copy: WebGL canvases print blank
    n_gl = sum(1 for p in s.parts for _, f in p.figures if any(t.type.endswith(("3d", "gl")) for t in f.data))
    assert n_gl and _pdf_image_widths(reader).count(True) >= n_gl
    if shutil.which("pdftoppm"):
        subprocess.run(["pdftoppm", "-r", "30", "-f", "1", "-l", "1", "-png", str(pdf_path), str(tmp_path / "p")],
                       check=True, timeout=60)
        pngs = list(tmp_path.glob("p-*.png"))
        assert len(pngs) == 1 and pngs[0].stat().st_size > 1000
    assert not [p for p in pdf_path.parent.iterdir() if p.name.endswith(".tmp")]


def test_pdf_without_a_renderer_writes_nothing(tmp_path, greenhouse, monkeypatch):
    monkeypatch.setattr(review, "_BROWSER_NAMES", ("no-such-browser-here",))
    with pytest.raises(review.RendererError, match="no PDF renderer"):
        write_review(greenhouse, tmp_path / "r.html", pdf=tmp_path / "r.pdf", date=DATE)
    assert not list(tmp_path.iterdir())


# --------------------------------------------------------------------------------------
# the command line
# --------------------------------------------------------------------------------------
def test_cli_writes_the_sheet_and_exit_code_follows_the_checks(tmp_path, capsys):
    out = tmp_path / "sub" / "review.html"
    rc = main(["review", str(GREENHOUSE), "-o", str(out), "--date", DATE, "-q"])
    doc = out.read_text(encoding="utf-8")
    status = re.search(r'id="overall" data-status="(\w+)"', doc).group(1)
    assert rc == (EXIT_CHECK_FAILED if status == FAIL else EXIT_OK)
    assert f"wrote {out}" in capsys.readouterr().out
    assert f'<span class="date">{DATE}</span>' in doc


def test_cli_exit_0_when_every_check_passes(tmp_path, capsys, only_fake):
    only_fake(_FAKE_CHECKS[:1])
    out = tmp_path / "review.html"
    assert main(["review", str(GREENHOUSE), "-o", str(out), "-q"]) == EXIT_OK
    assert 'data-status="pass"' in out.read_text(encoding="utf-8")
    assert "1 checks, 1 pass, 0 warn, 0 fail" in capsys.readouterr().out


def test_cli_exit_4_on_a_failing_design_and_the_sheet_is_written(tmp_path, capsys, only_fake):
    only_fake(_FAKE_CHECKS)
    out = tmp_path / "review.html"
    assert main(["review", str(GREENHOUSE), "-o", str(out), "-q"]) == EXIT_CHECK_FAILED
    assert 'data-status="fail"' in out.read_text(encoding="utf-8")
    assert "FAIL fake failing check (task region): 3.5 N against the limit 2 N - cable post C" in capsys.readouterr().out


def test_cli_missing_design_gives_exit_3_and_no_sheet(tmp_path, capsys):
    out = tmp_path / "review.html"
    assert main(["review", str(tmp_path / "nope.toml"), "-o", str(out)]) == EXIT_INVALID
    assert "an existing design file" in capsys.readouterr().err
    assert not out.exists()


def test_cli_invalid_design_gives_the_validation_list_and_no_sheet(tmp_path, capsys):
    bad = tmp_path / "bad.toml"
    text = GREENHOUSE.read_text()
    text = text.replace('mass = "1.2 kg"', 'mass = "-1.2 kg"').replace('diameter = "2 mm"', 'diameter = "2 parsecs per litre"')
    bad.write_text(text)
    out = tmp_path / "review.html"
    assert main(["review", str(bad), "-o", str(out)]) == EXIT_INVALID
    err = capsys.readouterr().err
    assert "problems in the design" in err and "platform.mass" in err and "cable.diameter" in err
    assert not out.exists() and [p.name for p in tmp_path.iterdir()] == ["bad.toml"]


@pytest.mark.parametrize("args, message", [
    (["-o", "review.pdf"], "ending in .html"),
    (["--date", "31/12/2024"], "--date"),
])
def test_cli_bad_options_give_exit_3(tmp_path, capsys, args, message, monkeypatch):
    monkeypatch.chdir(tmp_path)
    assert main(["review", str(GREENHOUSE), *args]) == EXIT_INVALID
    assert message in capsys.readouterr().err
    assert not list(tmp_path.iterdir())


def test_cli_pdf_without_renderer_gives_exit_3_and_writes_nothing(tmp_path, capsys, monkeypatch):
    monkeypatch.setattr(review, "_BROWSER_NAMES", ("no-such-browser-here",))
    out = tmp_path / "review.html"
    assert main(["review", str(GREENHOUSE), "-o", str(out), "--pdf", str(tmp_path / "r.pdf")]) == EXIT_INVALID
    assert "apt-get install chromium" in capsys.readouterr().err
    assert not list(tmp_path.iterdir())


def test_provider_assumptions_are_printed_once_on_the_sheet(monkeypatch, greenhouse):
    # every modelling assumption a verdict rests on must reach the sheet (a verdict without its
    # assumptions is a false pass waiting to happen); repeats across providers are printed once
    text = "the fake platform is taken to stay level (attachments coincide)"
    mod = types.ModuleType("ck_fake_assumer")
    mod.design_checks = lambda design, **options: []
    mod.design_assumptions = lambda design, **options: [text, text]
    monkeypatch.setitem(sys.modules, "ck_fake_assumer", mod)
    monkeypatch.setattr(checks_mod, "CHECK_PROVIDERS", ["ck_fake_assumer:design_checks"])
    monkeypatch.setattr(review, "_analysis_parts", lambda: [])
    assert checks_mod.run_assumptions(greenhouse) == [text]
    doc = build_review(greenhouse, date=DATE).html
    assert doc.count(review._h(text)) == 1
    assert "Assumptions the verdicts on this design rest on" in doc
