"""The report's explorer: packed data, size budget, and a real browser (Debian's chromium + chromedriver).

The browser test drives the system's chromium through selenium (no browser download); it keeps its
screenshots in $FAMWISE_SCREENSHOTS, or else in a pytest temporary folder printed in the output.
"""

import os
import shutil
from pathlib import Path

import numpy as np
import pytest

from famwise.report import build_report
from famwise.report.explorer import P_SCALE, STAT_STEPS, colour_table, pack_mask, pack_p, pack_stat, unpack
from famwise.report.results import read_run

from report_fixture import write_output

CHROMIUM = shutil.which("chromium")
DRIVER = shutil.which("chromedriver")
BUDGET = 5 * 1024 * 1024


@pytest.fixture(scope="module")
def report(tmp_path_factory):
    output = tmp_path_factory.mktemp("explorer") / "results"
    write_output(output)
    spec = output.parent / "study.yaml"
    spec.write_text("version: 1\nname: attention alpha\n")
    index = build_report(
        output, spec_text=spec.read_text(), spec_path=spec, input_files=[], started="2026-01-01T00:00:00+00:00"
    )
    return {"output": output, "index": index}


def test_packed_arrays_round_trip_within_their_quantisation():
    rng = np.random.default_rng(2)
    stat = rng.normal(scale=3.0, size=(4, 5, 6))
    stat[0, 0, 0] = np.nan
    limit = float(np.nanmax(np.abs(stat)))
    steps = unpack(pack_stat(stat, limit), "<i2", stat.size).reshape(stat.shape)
    assert steps[0, 0, 0] == -STAT_STEPS - 1
    finite = np.isfinite(stat)
    assert np.abs(steps[finite] / STAT_STEPS * limit - stat[finite]).max() <= limit / STAT_STEPS / 2 + 1e-12
    p = 10 ** -rng.uniform(0, 8, size=stat.shape)
    decoded = 10 ** (-unpack(pack_p(p), "<u2", p.size).reshape(p.shape).astype(float) / P_SCALE)
    assert np.abs(np.log10(decoded / p)).max() <= 0.5 / P_SCALE + 1e-12  # half a step per decade
    mask = rng.random(stat.shape) < 0.3
    assert np.array_equal(unpack(pack_mask(mask), "bits", mask.size).reshape(mask.shape), mask)


def test_report_with_explorer_stays_within_the_size_budget(report):
    html = report["index"].read_text(encoding="utf-8")
    size = report["index"].stat().st_size
    print(f"report size {size / 1e6:.2f} MB")
    assert size < BUDGET
    run = read_run(report["output"])
    # the explorer's share: at most 2 bytes per point per map before compression, base64 4/3 of that
    points = run.contrasts[0].stat.size
    start = html.index('<script type="application/json" class="xp-data">')
    payload = len(html[start : html.index("</script>", start)])
    print(
        f"explorer data {payload / 1e3:.0f} kB for {points} points and {len(run.contrasts[0].corrections)} corrections"
    )
    assert payload < points * 2 * (2 + 2 * len(run.contrasts[0].corrections)) * 4 / 3 + 20000
    assert "<script src" not in html and "http://" not in html and "https://" not in html


def test_page_without_script_keeps_the_static_figures_and_caveat(report):
    html = report["index"].read_text(encoding="utf-8")
    assert "The explorer needs JavaScript" in html
    assert "Kriegeskorte et al. 2009, Nature Neuroscience 12:535-540" in html
    assert (report["output"] / "report" / "figures" / "attention__clusters__values.png").is_file()


def _shots(tmp_path_factory) -> Path:
    folder = os.environ.get("FAMWISE_SCREENSHOTS")
    folder = Path(folder) if folder else tmp_path_factory.mktemp("screenshots")
    folder.mkdir(parents=True, exist_ok=True)
    print(f"screenshots in {folder}")
    return folder


def _driver(*, javascript: bool = True):
    """Debian's chromium through its chromedriver (selenium never downloads a browser here)."""
    if CHROMIUM is None or DRIVER is None:
        pytest.skip(
            "Debian's chromium and chromium-driver are not installed "
            "(apt-get install -y chromium chromium-driver; .ci/run installs them)"
        )
    webdriver = pytest.importorskip("selenium.webdriver", reason="selenium is not installed (pip install -e '.[test]')")
    from selenium.webdriver.chrome.service import Service

    options = webdriver.ChromeOptions()
    options.binary_location = CHROMIUM
    for argument in (
        "--headless=new",
        "--no-sandbox",
        "--disable-gpu",
        "--window-size=1300,1000",
        "--force-device-scale-factor=1",
        "--disable-background-networking",
        "--no-first-run",
    ):
        options.add_argument(argument)
    if not javascript:
        options.add_experimental_option("prefs", {"profile.managed_default_content_settings.javascript": 2})
    options.set_capability("goog:loggingPrefs", {"browser": "ALL"})
    return webdriver.Chrome(options=options, service=Service(DRIVER))


@pytest.fixture(scope="module")
def browser():
    driver = _driver()
    yield driver
    driver.quit()


def test_without_javascript_the_explorer_says_so_and_hides_its_controls(report, tmp_path_factory):
    driver = _driver(javascript=False)
    try:
        driver.get(report["index"].as_uri())
        root = driver.find_element("css selector", ".explorer")
        assert root.find_element("css selector", ".xp-nojs").is_displayed()
        assert not root.find_element("css selector", ".xp-views").is_displayed()
        assert "xp-ready" not in root.get_attribute("class")
        driver.get(report["index"].as_uri() + "#explore--attention")
        driver.save_screenshot(str(_shots(tmp_path_factory) / "0-without-javascript.png"))
    finally:
        driver.quit()


def _errors(driver) -> list[dict]:
    return [entry for entry in driver.get_log("browser") if entry["level"] in {"SEVERE", "ERROR"}]


def _pixel(driver, canvas, x: float, y: float) -> list[int]:
    """RGBA at CSS pixel (x, y) of a canvas."""
    return driver.execute_script(
        "var c = arguments[0], r = window.devicePixelRatio || 1;"
        "return Array.from(c.getContext('2d').getImageData(arguments[1] * r, arguments[2] * r, 1, 1).data);",
        canvas,
        x,
        y,
    )


def _click_at(driver, element, x: float, y: float, *, shift: bool = False) -> None:
    """Click at CSS pixel (x, y) from the element's top-left corner."""
    from selenium.webdriver.common.action_chains import ActionChains
    from selenium.webdriver.common.keys import Keys

    size = element.size
    chain = ActionChains(driver)
    if shift:
        chain.key_down(Keys.SHIFT)
    chain.move_to_element_with_offset(element, int(x - size["width"] / 2), int(y - size["height"] / 2)).click()
    if shift:
        chain.key_up(Keys.SHIFT)
    chain.perform()


def test_explorer_in_a_real_browser(report, browser, tmp_path_factory):
    from selenium.webdriver.support.ui import Select, WebDriverWait

    shots = _shots(tmp_path_factory)
    # positive control: the console check sees a script error
    bad = report["index"].with_name("bad.html")
    bad.write_text("<!doctype html><html><body><script>missing();</script></body></html>")
    browser.get(bad.as_uri())
    assert _errors(browser)

    browser.get(report["index"].as_uri())
    root = browser.find_element("css selector", ".explorer")
    browser.execute_script("arguments[0].scrollIntoView()", root)
    WebDriverWait(browser, 20).until(lambda _: "xp-ready" in root.get_attribute("class"))
    assert not root.find_element("css selector", ".xp-nojs").is_displayed()
    # starts at the peak: O1 (the largest |t| of the fixture), holm
    assert root.get_attribute("data-selected") == "O1"
    assert root.get_attribute("data-correction") == "holm"
    browser.save_screenshot(str(shots / "1-initial.png"))

    head = root.find_element("css selector", ".xp-head")
    tf = root.find_element("css selector", ".xp-tf")
    left, top, width, height = (float(tf.get_attribute(f"data-{k}")) for k in ("left", "top", "width", "height"))
    positions = browser.execute_script(
        "var d = JSON.parse(arguments[0].querySelector('.xp-data').textContent); return [d.channels, d.xy];", root
    )
    names, xy = positions
    cx, cy, scale = (float(head.get_attribute(f"data-{k}")) for k in ("cx", "cy", "r"))

    def channel_point(name):
        x, y = xy[names.index(name)]
        return cx + x * scale, cy - y * scale

    _click_at(browser, head, *channel_point("Pz"))
    assert root.get_attribute("data-selected") == "Pz"
    _click_at(browser, head, *channel_point("P4"), shift=True)
    assert root.get_attribute("data-selected") == "Pz,P4"
    caption = root.find_element("css selector", ".xp-tf-caption").text
    assert "mean over 2 channels (Pz, P4)" in caption
    # the map shows the mean of Pz and P4 at the cursor cell: its colour matches the colour table
    browser.save_screenshot(str(shots / "2-two-channels.png"))

    Select(root.find_element("css selector", ".xp-correction")).select_by_visible_text("clusters (cluster)")
    assert root.get_attribute("data-correction") == "clusters"
    rows = root.find_elements("css selector", ".xp-clusters tr[data-id]")
    assert [r.get_attribute("data-id") for r in rows] == ["1"]  # cluster 2 (p = 0.31) is not listed
    rows[0].click()
    assert root.get_attribute("data-cluster") == "1"
    run = read_run(report["output"])
    cluster = next(c for c in run.contrasts[0].corrections if c.name == "clusters").clusters[0]
    assert root.get_attribute("data-selected") == cluster["channels"]
    assert root.get_attribute("data-cursor") == f"{cluster['peak_freq_hz']:.3g} Hz,{cluster['peak_time_ms']:.0f} ms"
    detail = root.find_element("css selector", ".xp-detail")
    assert "its row of the table" in detail.text and str(cluster["n_points"]) in detail.text
    strip = detail.find_element("css selector", "svg.xp-strip")
    assert len(strip.find_elements("css selector", "circle")) == 3 * run.contrasts[0].n  # 2 conditions + contrast
    assert len(strip.find_elements("css selector", "line.xp-mean")) == 3
    # pixels at the cluster's peak: its peak channel drawn as a significant ring (white centre), Fz as a plain dot
    assert _pixel(browser, head, *channel_point(cluster["peak_channel"]))[:3] == [255, 255, 255]
    assert max(_pixel(browser, head, *channel_point("Fz"))[:3]) < 90
    # the map's top-right cell has the colour of the mean statistic over the cluster's channels
    contrast = run.contrasts[0]
    limit = float(np.nanmax(np.abs(contrast.stat)))
    members = [contrast.channels.index(c) for c in cluster["channels"].split(",")]
    quantised = np.round(contrast.stat[members, -1, -1] / limit * STAT_STEPS) / STAT_STEPS * limit
    index = round((quantised.mean() / limit + 1) / 2 * 63)
    expected = [int(colour_table()[index][k : k + 2], 16) for k in (1, 3, 5)]
    shape = contrast.stat.shape
    drawn = _pixel(browser, tf, left + width * (1 - 0.5 / shape[2]), top + height * 0.5 / shape[1])
    assert np.abs(np.array(drawn[:3]) - expected).max() <= 2, (drawn, expected)
    browser.execute_script("arguments[0].scrollIntoView()", detail)
    browser.save_screenshot(str(shots / "3-cluster.png"))

    # move the cursor: click the map's first cell (lowest frequency, earliest time)
    browser.execute_script("arguments[0].scrollIntoView()", root)
    _click_at(browser, tf, left + 2, top + height - 2)
    times = run.contrasts[0].times * 1000
    assert root.get_attribute("data-cursor") == f"{run.contrasts[0].freqs[0]:.3g} Hz,{times[0]:.0f} ms"
    # pixels: the head map at the centre is painted with a colour of the diverging table, not left blank
    assert _pixel(browser, head, cx, cy)[3] == 255
    assert _pixel(browser, tf, left + width / 2, top + height / 2)[3] == 255
    # hover readout names channel, frequency, time, statistic and both p values
    from selenium.webdriver.common.action_chains import ActionChains

    ActionChains(browser).move_to_element_with_offset(tf, 0, 0).perform()
    readout = root.find_element("css selector", ".xp-readout").text
    assert " Hz · " in readout and " ms · t = " in readout and "(uncorrected" in readout
    assert "corrected p = " in readout and "(clusters)" in readout
    browser.save_screenshot(str(shots / "4-cursor.png"))
    assert _errors(browser) == []
