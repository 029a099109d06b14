"""The comparison report: findings against an independent reduction, a page that parses, embeds
every figure, needs no network, and opens in headless Chromium without console errors; the CLI.
"""

import base64
import json
import os
import shutil
import subprocess
import sys
import tempfile
from html.parser import HTMLParser
from pathlib import Path

import numpy as np
import pytest

import timescale
from timescale.interface import cli
from timescale.interface.report import cell_summary, findings, write_report

sys.path.insert(0, os.path.dirname(__file__))
import plotreport_toys as toys  # noqa: E402

PNG_MAGIC = b"\x89PNG\r\n\x1a\n"  # PNG specification (ISO/IEC 15948), file signature


@pytest.fixture(scope="module")
def cube():
    return toys.swept_cube(trials=2, scales=(0.6, 2.0), factors=(0.5, 2.0, 4.0))


@pytest.fixture(scope="module")
def page(cube, tmp_path_factory):
    folder = tmp_path_factory.mktemp("report")
    with timescale.registered(toys.ToyLowpass()), timescale.registered(toys.ToyNoisy()):
        path = write_report(cube, folder, pulses=toys.pulses(), title="Toy comparison")
    return path


class _Page(HTMLParser):
    def __init__(self):
        super().__init__()
        self.imgs, self.links, self.scripts, self.text, self.h2 = [], [], 0, [], []
        self._in_h2 = False

    def handle_starttag(self, tag, attrs):
        a = dict(attrs)
        if tag == "img":
            self.imgs.append(a)
        if tag in ("a", "link") and "href" in a:
            self.links.append(a["href"])
        if tag == "script":
            self.scripts += 1
        self._in_h2 = tag == "h2"

    def handle_endtag(self, tag):
        if tag == "h2":
            self._in_h2 = False

    def handle_data(self, data):
        self.text.append(data)
        if self._in_h2:
            self.h2.append(data)


def _parse(path):
    p = _Page()
    p.feed(Path(path).read_text(encoding="utf-8"))
    p.close()
    return p


# ---- pure summaries ---------------------------------------------------------------------------

def test_findings_match_an_independent_reduction(cube):
    target = 0.1
    # served: for every pulse some scale meets the target (median over trials)
    ok = (cube["nrmse"].median("trial") <= target).any("scale").all("pulse")
    for fd in findings(cube, target=target):
        expect = [float(f) for f in cube["factor"].values if bool(ok.sel({"method_name": fd.method, "factor": f}))]
        assert list(fd.served) == expect
    fd = {f.method: f for f in findings(cube, target=target)}
    # toy-lowpass refuses factor 4 (max_factor 3): never served there, and the text says why
    assert 4.0 not in fd["toy-lowpass"].served
    assert "max_factor" in fd["toy-lowpass"].text
    assert fd["toy-lowpass"].n_failed == 2 * 2  # two pulses x two scales at factor 4


def test_findings_quote_the_cheapest_qualifying_design(cube):
    fd = {f.method: f for f in findings(cube, target=0.1)}["toy-lowpass"]
    assert fd.served  # the toy meets 0.1 at some factor with scale 2
    for f in fd.served:
        med = cube.median("trial").sel({"method_name": "toy-lowpass", "factor": f})
        qual = med["nrmse"] <= 0.1
        cheapest = float(med["area"].where(qual).min("scale").max("pulse"))
        assert fd.cheapest[f]["area"] == pytest.approx(cheapest, rel=1e-12)


def test_findings_sndr_target_is_a_minimum(cube):
    # SNDR = -20 log10(NRMSE) (DESIGN §6): SNDR >= 20 dB is the same set as NRMSE <= 0.1
    a = {f.method: f.served for f in findings(cube, target=0.1)}
    b = {f.method: f.served for f in findings(cube, target=20.0, fidelity="sndr_db")}
    assert a == b


def test_cell_summary_orders_best_median_worst(cube):
    rows, failures = cell_summary(cube, "toy-noisy")
    assert [r.rank for r in rows] == ["best", "median", "worst"]
    v = [r.values["nrmse"] for r in rows]
    assert v[0] <= v[1] <= v[2]
    assert v[0] == pytest.approx(float(cube["nrmse"].sel({"method_name": "toy-noisy"}).median("trial").min()))
    assert failures == []
    rows, failures = cell_summary(cube, "toy-lowpass")
    assert len(failures) == 1 and failures[0][1] == 4 and "max_factor" in failures[0][0]


def test_bad_arguments(cube, tmp_path):
    with pytest.raises(TypeError, match="results cube"):
        write_report({"a": 1}, tmp_path)
    with pytest.raises(ValueError, match="fidelity"):
        write_report(cube, tmp_path, fidelity="nrms")
    with pytest.raises(ValueError, match="target"):
        findings(cube, target=float("nan"))


# ---- the page ---------------------------------------------------------------------------------

def test_page_parses_and_embeds_every_figure(page):
    p = _parse(page)
    pngs = sorted(page.parent.glob("*.png"))
    svgs = sorted(page.parent.glob("*.svg"))
    assert len(pngs) == len(svgs) == len(p.imgs) >= 6  # fidelity, bandwidth, cost, trade-off, map, waveforms, spectra
    files = {f.read_bytes() for f in pngs}
    for img in p.imgs:
        src = img["src"]
        assert src.startswith("data:image/png;base64,")
        data = base64.b64decode(src.split(",", 1)[1], validate=True)
        assert data.startswith(PNG_MAGIC) and data in files
        assert img.get("alt")
    # no network: no script, no remote reference
    assert p.scripts == 0
    assert not [h for h in p.links if h.startswith(("http:", "https:", "//"))]
    html = page.read_text(encoding="utf-8")
    assert "http://" not in html.replace("http://www.w3.org", "") and "https://" not in html


def test_page_has_the_sections_a_designer_reads(page):
    p = _parse(page)
    heads = " | ".join(p.h2)
    for name in ("At a glance", "Findings per method", "What was compared", "Figures",
                 "Cells per method", "Setup details"):
        assert name in heads
    text = " ".join(p.text)
    assert "Toy comparison" in text
    assert "example-balanced" in text  # the technology card
    assert "toy sweep" in text  # the suite
    assert "max_factor" in text  # a failure reason


def test_report_without_pulses_skips_waveforms_with_a_note(cube, tmp_path):
    path = write_report(cube, tmp_path)
    text = " ".join(_parse(path).text)
    assert "not stored in the results cube" in text
    assert not (tmp_path / "waveforms.png").exists()
    assert (tmp_path / "fidelity.png").exists()


@pytest.mark.browser
def test_page_opens_in_headless_chromium_without_console_errors(page, tmp_path):
    exe = shutil.which("chromium") or ("/usr/bin/chromium" if os.path.exists("/usr/bin/chromium") else None)
    if exe is None:
        pytest.skip("chromium is not installed (Debian package 'chromium'; .ci/run installs it)")
    shot = tmp_path / "report.png"
    profile = tempfile.mkdtemp(prefix="chromium-profile-", dir=tmp_path)
    cmd = [exe, "--headless", "--no-sandbox", "--disable-gpu", "--disable-quic", "--no-first-run",
           "--disable-background-networking", "--disable-component-update", "--disable-sync",
           f"--user-data-dir={profile}", "--enable-logging=stderr", "--v=0", "--hide-scrollbars",
           "--window-size=1200,2400", f"--screenshot={shot}", page.resolve().as_uri()]
    res = subprocess.run(cmd, capture_output=True, text=True, timeout=120)
    console = [ln for ln in res.stderr.splitlines() if "CONSOLE" in ln]
    assert res.returncode == 0, res.stderr[-2000:]
    assert console == []
    data = shot.read_bytes()
    assert data.startswith(PNG_MAGIC)
    # a page that rendered is not one flat colour
    import matplotlib.image as mpimg

    img = mpimg.imread(shot)
    assert img.shape[0] == 2400 and float(np.std(img[..., :3])) > 0.05


# ---- command line -----------------------------------------------------------------------------

@pytest.fixture(scope="module")
def cube_file(cube, tmp_path_factory):
    path = tmp_path_factory.mktemp("cube") / "toy.nc"
    timescale.save_cube(cube, path)
    return path


def test_cli_report(cube_file, tmp_path, capsys):
    assert cli.main(["report", str(cube_file), "-o", str(tmp_path / "r"), "--target", "0.2"]) == 0
    page = tmp_path / "r" / "report.html"
    assert page.exists() and "report written" in capsys.readouterr().out
    assert "NRMSE ≤ 0.2" in " ".join(_parse(page).text)


@pytest.mark.parametrize("kind, extra", [
    ("metric", ["--metric", "power", "--select", "pulse=gaussian"]),
    ("tradeoff", ["--cost", "power", "--fidelity", "sndr_db"]),
    ("map", ["--x", "factor", "--y", "scale"]),
])
def test_cli_plot(cube_file, tmp_path, kind, extra):
    out = tmp_path / f"{kind}.png"
    assert cli.main(["plot", str(cube_file), kind, "-o", str(out), *extra]) == 0
    assert out.read_bytes().startswith(PNG_MAGIC)


def test_cli_plot_reports_bad_names(cube_file, tmp_path, capsys):
    assert cli.main(["plot", str(cube_file), "metric", "--metric", "nrmsee", "-o", str(tmp_path / "x.png")]) == 2
    assert "nrmse" in capsys.readouterr().err
    assert cli.main(["plot", str(cube_file), "waveforms", "-o", str(tmp_path / "w.png")]) == 2
    assert "not stored" in capsys.readouterr().err


@pytest.mark.slow
def test_cli_demo_writes_the_report(tmp_path, capsys):
    nc, folder = tmp_path / "demo.nc", tmp_path / "demo-report"
    assert cli.main(["demo", "-o", str(nc), "--report", str(folder)]) == 0
    page = folder / "report.html"
    p = _parse(page)
    text = " ".join(p.text)
    assert "Invented scenario" in text
    methods = [str(m) for m in timescale.load_cube(nc)["method_name"].values]
    for m in methods:
        assert m in text
    assert (folder / "waveforms.png").exists()  # the demo's pulses are known: waveforms re-run
    plugins = json.loads(timescale.load_cube(nc).attrs["plugins"])
    assert set(plugins) == set(methods)
