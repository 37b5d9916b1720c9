"""The demo report in a real browser: Debian's headless Chromium renders it to PNG and PDF,
its DOM holds every expected section, and the page itself asks for nothing over the network."""
from __future__ import annotations

import json
import subprocess
from pathlib import Path

import pytest
from matplotlib import image

import cohortstone

DEMO = Path(__file__).parents[2] / "configs" / "demo.yaml"
FLAGS = ["--headless", "--no-sandbox", "--disable-gpu", "--disable-quic", "--no-first-run",
         "--disable-background-networking", "--disable-component-update", "--disable-sync",
         "--hide-scrollbars"]
SECTIONS = ["Data", "Who was analysed", "Table 1", "Prevalence", "Odds ratios", "Forest plot",
            "Methods", "Limitations and cautions"]


def browse(chromium: str, page: Path, folder: Path, *action: str) -> subprocess.CompletedProcess:
    profile = folder / f"profile-{len(list(folder.glob('profile-*')))}"
    return subprocess.run([chromium, *FLAGS, f"--user-data-dir={profile}", *action,
                           page.resolve().as_uri()], capture_output=True, text=True, timeout=120)


def page_requests(netlog: Path) -> list[str]:
    """URLs the page itself asked for (its network isolation key is the file:// site);
    Chromium's own background requests carry other keys and are not the page's doing."""
    text = netlog.read_text()
    try:
        log = json.loads(text)
    except json.JSONDecodeError:  # a log cut short at exit lacks its closing brackets
        log = json.loads(text.rstrip().rstrip(",") + "]}")
    start = log["constants"]["logEventTypes"]["URL_REQUEST_START_JOB"]
    return [e["params"]["url"] for e in log["events"]
            if e["type"] == start and "file://" in e["params"].get("network_isolation_key", "")
            and not e["params"]["url"].startswith(("file:", "data:"))]


@pytest.fixture(scope="module")
def report(tmp_path_factory) -> Path:
    out = tmp_path_factory.mktemp("reports")
    return cohortstone.run(DEMO, out=out).output_dir / "report.html"


def test_the_report_renders_to_a_non_blank_screenshot(chromium, report, tmp_path):
    shot = tmp_path / "report.png"
    browse(chromium, report, tmp_path, "--window-size=1200,2400", f"--screenshot={shot}")
    pixels = image.imread(shot)
    assert pixels.shape[0] >= 2000 and pixels.shape[1] >= 1000
    ink = (pixels[..., :3] < 0.5).mean()
    assert 0.005 < ink < 0.5, f"the page should carry text and figures, ink share {ink:.4f}"


def test_the_report_prints_to_pdf(chromium, report, tmp_path):
    pdf = tmp_path / "report.pdf"
    browse(chromium, report, tmp_path, "--no-pdf-header-footer", f"--print-to-pdf={pdf}")
    data = pdf.read_bytes()
    assert data.startswith(b"%PDF") and len(data) > 20_000
    assert data.count(b"/Type /Page") - data.count(b"/Type /Pages") >= 3, "several pages"


def test_every_section_is_in_the_rendered_dom_and_no_network_is_asked(chromium, report,
                                                                     tmp_path):
    netlog = tmp_path / "net.json"
    done = browse(chromium, report, tmp_path, "--dump-dom", f"--log-net-log={netlog}")
    for heading in SECTIONS:
        assert f"<h2>{heading}</h2>" in done.stdout
    assert "<svg" in done.stdout
    assert page_requests(netlog) == []


def test_the_network_check_would_catch_a_page_that_loads_from_outside(chromium, tmp_path):
    # the detector's own control: a page with an outside image must be caught
    canary = tmp_path / "canary.html"
    canary.write_text('<html><body><img src="http://outside.invalid/x.png"></body></html>')
    netlog = tmp_path / "net.json"
    browse(chromium, canary, tmp_path, "--dump-dom", f"--log-net-log={netlog}")
    assert page_requests(netlog) == ["http://outside.invalid/x.png"]
