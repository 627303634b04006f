"""The HTML report as a browser shows it: headless Chromium (Debian package `chromium`) opens a
report of a real virtual-bench run, takes a screenshot, and dumps the DOM it rendered.

Skipped locally when Chromium is missing (with a message); under CI (`CI` set) a missing
Chromium fails, since .ci/setup.d/chromium.sh installs it.
"""

from __future__ import annotations

import os
import shutil
import subprocess
from pathlib import Path

import numpy as np
import pytest
from bench_helpers import shipped_bench, shipped_plan
from matplotlib.image import imread

from reports.html_page import esc
from reports.run_export import run_record
from reports.run_html import render_run
from reports.svg_plots import DATA_COLOUR
from rig.runner import run_plan
from rig.store import ResultStore

WIDTH, HEIGHT = 1200, 2600  # the whole page down to its margin plot
FAIL_CELL = "#f6c6c6"  # reports.html_page: background of a failed step's verdict cell


def chromium() -> str:
    found = shutil.which("chromium") or shutil.which("chromium-browser")
    if found is None:
        if os.environ.get("CI"):
            pytest.fail("chromium is missing; CI installs it with .ci/setup.d/chromium.sh")
        pytest.skip("headless Chromium not installed (Debian: apt-get install chromium)")
    return found


def browser(binary: str, profile: Path, *args: str) -> subprocess.CompletedProcess[str]:
    return subprocess.run(
        [binary, "--headless", "--no-sandbox", "--disable-gpu", "--hide-scrollbars",
         f"--user-data-dir={profile}", *args],
        capture_output=True, text=True, timeout=90, check=False,
    )  # fmt: skip


def colour_share(image: np.ndarray, hex_colour: str, tolerance: float = 3 / 255) -> float:
    """The share of pixels within ``tolerance`` of a colour in every channel."""
    rgb = np.array([int(hex_colour[i : i + 2], 16) / 255 for i in (1, 3, 5)])
    close = np.all(np.abs(image[:, :, :3] - rgb) <= tolerance, axis=2)
    return float(close.mean())


@pytest.mark.timeout(240)
def test_report_renders_its_tables_and_plots_in_chromium(tmp_path: Path) -> None:
    binary = chromium()
    with shipped_bench("temp-circuit", ("open:signal",), folder=tmp_path) as (_, station):
        summary = run_plan(
            shipped_plan("temp-circuit-check", station),
            "HAR-<7>",
            operator="qa",
            ask=lambda t: True,
        )
    store = ResultStore(station.store_path)
    try:
        record = run_record(store, summary.run_id)
    finally:
        store.close()
    page = tmp_path / "report.html"
    page.write_text(render_run(record), encoding="utf-8")
    url = page.as_uri()

    shot = tmp_path / "report.png"
    done = browser(binary, tmp_path / "profile-1", f"--screenshot={shot}",
                   f"--window-size={WIDTH},{HEIGHT}", url)  # fmt: skip
    assert shot.is_file(), done.stderr[-2000:]
    image = imread(shot)
    assert image.shape[:2] == (HEIGHT, WIDTH)
    # not blank: many colours, and a real share of the page is not white
    assert len(np.unique(image[:, :, :3].reshape(-1, 3), axis=0)) > 50
    assert float((image[:, :, :3].mean(axis=2) < 0.9).mean()) > 0.02
    # the steps table shows failed verdict cells, and the margin plot its data points
    assert colour_share(image, FAIL_CELL) > 1e-4
    assert colour_share(image, DATA_COLOUR) > 1e-5

    dom = browser(binary, tmp_path / "profile-2", "--dump-dom", url)
    assert dom.returncode == 0, dom.stderr[-2000:]
    text = dom.stdout
    assert 'id="steps"' in text and 'id="instruments"' in text and "<svg" in text
    for step in record["steps"]:
        assert esc(step["step_id"]) in text
    assert "HAR-&lt;7&gt;" in text and "<7>" not in text  # the serial stayed text
