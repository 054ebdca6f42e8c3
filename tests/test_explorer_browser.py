"""The explorer page in a real headless chromium, against a real `sluice serve`.

Needs Debian's chromium and chromium-driver (`.ci/ensure-browser` installs them) and
selenium (a test extra). Without them the test skips with the reason, except under
CI=true, where it fails. The screenshot lands in the test's tmp folder, or in
$SLUICE_SCREENSHOT_DIR when that is set.
"""

from __future__ import annotations

import os
import shutil
import struct
from pathlib import Path

import pytest
import requests

from tests.conftest import scenario

CHROME_FLAGS = ["--headless", "--no-sandbox", "--disable-gpu", "--disable-quic", "--no-first-run",
                "--disable-background-networking", "--disable-component-update", "--disable-sync",
                "--window-size=1500,1100"]


def _missing() -> str | None:
    for tool in ("chromium", "chromedriver"):
        if shutil.which(tool) is None:
            return f"{tool} is not installed (run .ci/ensure-browser)"
    try:
        import selenium  # noqa: F401
    except ImportError:
        return "selenium is not installed (pip install -e '.[test]')"
    return None


@pytest.fixture
def browser(tmp_path):
    reason = _missing()
    if reason:
        if os.environ.get("CI") == "true":
            pytest.fail(f"browser test cannot run under CI: {reason}")
        pytest.skip(reason)
    from selenium import webdriver
    from selenium.webdriver.chrome.service import Service

    options = webdriver.ChromeOptions()
    options.binary_location = shutil.which("chromium")
    for flag in CHROME_FLAGS + [f"--user-data-dir={tmp_path / 'chromium-profile'}"]:
        options.add_argument(flag)
    driver = webdriver.Chrome(service=Service(shutil.which("chromedriver")), options=options)
    driver.set_page_load_timeout(30)
    try:
        yield driver
    finally:
        driver.quit()


def _png_size(path: Path) -> tuple[int, int]:
    data = path.read_bytes()
    assert data[:8] == b"\x89PNG\r\n\x1a\n", "not a PNG file"
    return struct.unpack(">II", data[16:24])


@pytest.mark.browser
@pytest.mark.server
def test_explorer_solves_a_scenario_and_draws_the_cut(browser, server, tmp_path):
    from selenium.webdriver.common.by import By
    from selenium.webdriver.support.ui import Select, WebDriverWait

    wait = WebDriverWait(browser, 30)
    browser.get(server.url + "/")
    wait.until(lambda d: d.find_element(By.TAG_NAME, "body").get_attribute("data-state") == "ready")
    Select(browser.find_element(By.ID, "scenario")).select_by_value("depots-maxflow")
    wait.until(lambda d: "dc-brackenford" in d.find_element(By.ID, "payload").get_attribute("value"))
    assert Select(browser.find_element(By.ID, "kind")).first_selected_option.get_attribute("value") == "maxflow"
    browser.find_element(By.ID, "solve").click()
    wait.until(lambda d: d.find_element(By.TAG_NAME, "body").get_attribute("data-state") in ("solved", "failed"))
    assert browser.find_element(By.TAG_NAME, "body").get_attribute("data-state") == "solved"

    # The cut drawn on the page is the cut the API returns for the same scenario.
    expected = requests.post(server.url + "/v1/maxflow", json=_scenario(), timeout=30).json()["cut"]
    svg = browser.find_element(By.CSS_SELECTOR, "#diagram svg")
    assert svg.get_attribute("data-kind") == "maxflow"
    drawn = {int(g.get_attribute("data-arc")) for g in svg.find_elements(By.CSS_SELECTOR, "g.cut-arc")}
    assert drawn == set(expected["arcs"]) == {6, 7}
    assert len(svg.find_elements(By.CSS_SELECTOR, "g.cut-arc .notch")) == 2 * len(drawn)
    sink_side = {g.get_attribute("data-node") for g in svg.find_elements(By.CSS_SELECTOR, "g.node.sink-side")}
    assert sink_side == {"store-quillmouth"}
    summary = browser.find_element(By.ID, "summary").text
    assert "160" in summary and "checked" in summary
    curl = browser.find_element(By.ID, "curl").text
    assert f"{server.url}/v1/maxflow" in curl and "dc-brackenford" in curl

    folder = Path(os.environ.get("SLUICE_SCREENSHOT_DIR") or tmp_path)
    folder.mkdir(parents=True, exist_ok=True)
    shot = folder / "explorer-maxflow-cut.png"
    browser.find_element(By.ID, "diagram").location_once_scrolled_into_view
    assert browser.save_screenshot(str(shot))
    width, height = _png_size(shot)
    assert width >= 1000 and height >= 700 and shot.stat().st_size > 20_000
    print(f"screenshot: {shot}")


@pytest.mark.browser
@pytest.mark.server
def test_explorer_shows_problem_pointers(browser, server):
    from selenium.webdriver.common.by import By
    from selenium.webdriver.support.ui import WebDriverWait

    wait = WebDriverWait(browser, 30)
    browser.get(server.url + "/")
    wait.until(lambda d: d.find_element(By.TAG_NAME, "body").get_attribute("data-state") == "ready")
    area = browser.find_element(By.ID, "payload")
    area.clear()
    area.send_keys('{"source": "a", "sink": "b", "arcs": [{"from": "a", "to": "b", "capacity": -4}]}')
    browser.find_element(By.ID, "solve").click()
    wait.until(lambda d: d.find_element(By.TAG_NAME, "body").get_attribute("data-state") == "failed")
    error = browser.find_element(By.ID, "error")
    assert error.is_displayed() and "/arcs/0/capacity" in error.text and "422" in error.text


def _scenario() -> dict:

    return scenario("depots-maxflow")


def _ready(browser, server):
    from selenium.webdriver.common.by import By
    from selenium.webdriver.support.ui import WebDriverWait

    wait = WebDriverWait(browser, 30)
    browser.get(server.url + "/")
    wait.until(lambda d: d.find_element(By.TAG_NAME, "body").get_attribute("data-state") == "ready")
    return wait


def _solve_pasted(browser, wait, kind: str, body: str) -> None:
    from selenium.webdriver.common.by import By
    from selenium.webdriver.support.ui import Select

    Select(browser.find_element(By.ID, "kind")).select_by_value(kind)
    area = browser.find_element(By.ID, "payload")
    area.clear()
    area.send_keys(body)
    browser.find_element(By.ID, "solve").click()
    wait.until(lambda d: d.find_element(By.TAG_NAME, "body").get_attribute("data-state") in ("solved", "failed"))
    assert browser.find_element(By.TAG_NAME, "body").get_attribute("data-state") == "solved"


def _facts(browser) -> dict[str, str]:
    from selenium.webdriver.common.by import By

    names = [e.text for e in browser.find_elements(By.CSS_SELECTOR, "#summary dt")]
    values = [e.text for e in browser.find_elements(By.CSS_SELECTOR, "#summary dd")]
    return dict(zip(names, values))


@pytest.mark.browser
@pytest.mark.server
def test_explorer_shows_assignments_as_a_table(browser, server, tmp_path):
    """The pairs are in the summary, not only inside the collapsed full response."""

    from selenium.webdriver.common.by import By
    from selenium.webdriver.support.ui import Select

    wait = _ready(browser, server)
    Select(browser.find_element(By.ID, "scenario")).select_by_value("vans-assignment")
    wait.until(lambda d: "van-amber" in d.find_element(By.ID, "payload").get_attribute("value"))
    browser.find_element(By.ID, "solve").click()
    wait.until(lambda d: d.find_element(By.TAG_NAME, "body").get_attribute("data-state") in ("solved", "failed"))
    expected = requests.post(server.url + "/v1/assignment", timeout=30,
                             json=scenario("vans-assignment")).json()
    table = browser.find_element(By.CSS_SELECTOR, "#tables table#assignments")
    assert table.is_displayed()
    assert [th.text for th in table.find_elements(By.CSS_SELECTOR, "thead th")] == ["agent", "task", "cost"]
    rows = [[td.text for td in tr.find_elements(By.TAG_NAME, "td")]
            for tr in table.find_elements(By.CSS_SELECTOR, "tbody tr")]
    assert rows == [[a["agent"], a["task"], str(a["cost"])] for a in expected["assignments"]]
    assert len(rows) == 4 and _facts(browser)["assignments"] == "4 pairs"
    assert not browser.find_element(By.TAG_NAME, "details").get_attribute("open")  # still collapsed
    folder = Path(os.environ.get("SLUICE_SCREENSHOT_DIR") or tmp_path)
    folder.mkdir(parents=True, exist_ok=True)
    assert browser.save_screenshot(str(folder / "explorer-assignment-table.png"))


@pytest.mark.browser
@pytest.mark.server
def test_explorer_says_when_an_answer_came_from_the_cache(browser, server):
    import uuid

    wait = _ready(browser, server)
    # A network of its own (ids no other test uses), so the first solve is a miss.
    tag = uuid.uuid4().hex[:8]
    body = (f'{{"source": "a-{tag}", "sink": "b-{tag}", '
            f'"arcs": [{{"from": "a-{tag}", "to": "b-{tag}", "capacity": 4}}]}}')
    _solve_pasted(browser, wait, "maxflow", body)
    first = _facts(browser)
    assert first["cache"] == "miss: solved now and stored" and "from the cache" not in first["time (ms)"]
    assert first["minimum cut"] == "1 arc, capacity 4"  # not "1 arcs"
    _solve_pasted(browser, wait, "maxflow", body)
    again = _facts(browser)
    assert again["cache"] == "hit: answered from the cache, not solved again"
    assert again["time (ms)"].endswith("(solve 0: the answer came from the cache)")
    assert again["value"] == first["value"] == "4"
