"""report.html in a real browser: headless Chromium opens the page from disk.

The page's own self-test (``report.html?selftest``) decodes every image, loads
the metadata of every clip and sorts the case table; Chromium's ``--dump-dom``
hands back what it found.  Skipped only where no Chromium is installed
(.ci/run installs Debian's ``chromium``).
"""

from __future__ import annotations

import json
from urllib.parse import unquote

import pytest

from audiobw.report.write import write_report
from audiobw.report.browser import find_chromium, screenshot, selftest

from .test_report import CLIP_NAME, add_render, check_shown_values, make_sweep

pytestmark = pytest.mark.skipif(
    find_chromium() is None,
    reason="no Chromium on PATH: the browser test of report.html needs headless "
    "Chromium (apt-get install chromium; .ci/run installs it)",
)


@pytest.fixture(scope="module")
def page(tmp_path_factory):
    root = tmp_path_factory.mktemp("browser")
    out = make_sweep(
        root,
        {
            "response": "bandpass",
            "family": "butterworth,bessel",
            "order": "2,4",
            "low_edges": "20:120:3",
            "high_edges": "4k:18k:5",
            "min_snr_a": "60dB",
            "max_loss": "0.2dB",
        },
        name="<script>alert(1)</" + "script>.wav",
    )
    add_render(out)
    paths = write_report(out)
    spec = json.loads(paths["spec_json"].read_text(encoding="utf-8"))
    return {"out": out, "paths": paths, "spec": spec, "result": selftest(paths["html"])}


def test_no_console_errors_and_no_injected_script(page):
    r = page["result"]
    assert r["errors"] == [] and r["console"] == []
    assert r["scripts"] == 1  # the page's own; a file name did not become a script
    assert r["inputPath"].endswith("/<script>alert(1)</script>.wav")
    assert r["title"] == "Passband spec sheet — script>.wav"
    # the file-derived strings are text nodes in the live DOM
    assert "&lt;script&gt;alert(1)&lt;/script&gt;.wav" in r["dom"]
    assert "&lt;img src=x onerror=alert(1)&gt;.wav" in r["dom"] and "<img src=x" not in r["dom"]


def test_every_image_decodes_at_its_size(page):
    from PIL import Image  # Pillow, installed with matplotlib

    imgs = page["result"]["images"]
    pngs = [p for k, p in page["paths"].items() if k.endswith("_png")]
    assert len(imgs) == len(pngs) == 8  # with the masking and Wiener plots of a music program
    sizes = set()
    for p in pngs:
        with Image.open(p) as im:
            sizes.add(im.size)
    for img in imgs:
        assert img["ok"] and (img["w"], img["h"]) in sizes, img


def test_audio_elements_point_at_files_that_exist(page):
    clips = page["result"]["audio"]
    assert len(clips) == 3
    for c in clips:
        assert (page["out"] / unquote(c["src"])).is_file(), c
        assert c["ok"] and c["error"] is None and c["duration_s"] == pytest.approx(0.5, abs=0.01), c
    assert any(unquote(c["src"]).endswith(CLIP_NAME) for c in clips)


def test_shown_spec_values_equal_spec_json(page):
    items = [(s["key"], s["value"], s["text"]) for s in page["result"]["specs"]]
    assert len(items) >= 30
    assert check_shown_values(items, page["spec"]) >= 25


def test_case_table_sorts(page):
    s = page["result"]["sorted"]
    assert s["ascending"] and s["rows"] == len(json.loads((page["out"] / "sweep.json").read_text())["cases"])


def test_screenshot(page, tmp_path):
    from PIL import Image

    shot = screenshot(page["paths"]["html"], tmp_path / "report.png", width=1100, height=1400)
    with Image.open(shot) as im:
        assert im.size == (1100, 1400)
        # a rendered page, not a blank one: the dark table heads and the light paper both appear
        lo, hi = im.convert("L").getextrema()
        assert lo < 60 and hi > 230
    print(f"screenshot: {shot}")
