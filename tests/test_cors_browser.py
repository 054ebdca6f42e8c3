"""A real page on another origin calls the service from headless chromium (CORS), and
the explorer works with API keys. Same browser set-up as tests/test_explorer_browser.py."""

from __future__ import annotations

import json
import threading
from http.server import BaseHTTPRequestHandler, ThreadingHTTPServer

import pytest

from tests.conftest import RunningServer, free_port, scenario_bytes
from tests.test_explorer_browser import browser  # noqa: F401 - the fixture

pytestmark = [pytest.mark.browser, pytest.mark.server]

KEY = "acme-key-0001"
PAGE = """<!doctype html><html><body data-state="running"><script>
const SLUICE = %(sluice)s, BODY = %(body)s;
(async () => {
  const out = {};
  try {
    const r = await fetch(SLUICE + "/v1/maxflow", {method: "POST", body: BODY,
      headers: {"Content-Type": "application/json", "Authorization": "Bearer %(key)s"}});
    const doc = await r.json();
    out.status = r.status; out.value = doc.value;
    out.cacheStatus = r.headers.get("Cache-Status"); out.requestId = r.headers.get("X-Request-Id");
    const denied = await fetch(SLUICE + "/v1/maxflow", {method: "POST", body: BODY,
      headers: {"Content-Type": "application/json"}});
    out.unauthenticated = denied.status;
    out.problem = (await denied.json()).type;
  } catch (e) { out.error = String(e); }
  document.body.dataset.result = JSON.stringify(out);
  document.body.dataset.state = "done";
})();
</script></body></html>"""


class _Page(BaseHTTPRequestHandler):
    html = b""

    def do_GET(self):  # noqa: N802 - the http.server interface
        self.send_response(200)
        self.send_header("Content-Type", "text/html")
        self.send_header("Content-Length", str(len(self.html)))
        self.end_headers()
        self.wfile.write(self.html)

    def log_message(self, *args):
        pass


@pytest.fixture(scope="module")
def page_port():
    return free_port()


@pytest.fixture(scope="module")
def keyed(tmp_path_factory, page_port):
    srv = RunningServer(env={"SLUICE_API_KEYS": f"acme:{KEY}",
                             "SLUICE_CORS_ORIGINS": f"http://127.0.0.1:{page_port}"},
                        workers=1, data_dir=str(tmp_path_factory.mktemp("cors-data")))
    yield srv
    srv.stop()


@pytest.fixture(scope="module")
def page(keyed, page_port):
    body = json.dumps(scenario_bytes("depots-maxflow").decode())
    _Page.html = (PAGE % {"sluice": json.dumps(keyed.url), "body": body, "key": KEY}).encode()
    httpd = ThreadingHTTPServer(("127.0.0.1", page_port), _Page)
    thread = threading.Thread(target=httpd.serve_forever, daemon=True)
    thread.start()
    yield page_port
    httpd.shutdown()
    httpd.server_close()


def _result(browser, url: str) -> dict:  # noqa: F811 - the fixture
    from selenium.webdriver.common.by import By
    from selenium.webdriver.support.ui import WebDriverWait

    browser.get(url)
    WebDriverWait(browser, 30).until(lambda d: d.find_element(By.TAG_NAME, "body").get_attribute("data-state") == "done")
    return json.loads(browser.find_element(By.TAG_NAME, "body").get_attribute("data-result"))


def test_a_page_on_a_configured_origin_solves_with_its_key(browser, page):  # noqa: F811
    out = _result(browser, f"http://127.0.0.1:{page}/")
    assert out.get("error") is None, out
    assert out["status"] == 200 and out["value"] == 160
    assert out["cacheStatus"].startswith("sluice;") and len(out["requestId"]) >= 16  # exposed headers
    assert out["unauthenticated"] == 401 and out["problem"].endswith("unauthorized")


def test_a_page_on_another_origin_is_refused_by_the_browser(browser, page):  # noqa: F811
    out = _result(browser, f"http://localhost:{page}/")  # localhost is another origin than 127.0.0.1
    assert "status" not in out and "Failed to fetch" in out["error"], out


def test_the_explorer_lists_examples_once_a_key_is_typed(browser, keyed):  # noqa: F811
    from selenium.webdriver.common.by import By
    from selenium.webdriver.support.ui import Select, WebDriverWait

    wait = WebDriverWait(browser, 30)
    browser.get(keyed.url + "/")
    wait.until(lambda d: d.find_element(By.TAG_NAME, "body").get_attribute("data-state") == "ready")
    names = lambda: [o.get_attribute("value") for o in Select(browser.find_element(By.ID, "scenario")).options]  # noqa: E731
    assert names() == [""]  # the list needs a key on this service
    browser.find_element(By.ID, "apikey").send_keys(KEY)
    wait.until(lambda d: "depots-maxflow" in names())
    Select(browser.find_element(By.ID, "scenario")).select_by_value("depots-maxflow")
    wait.until(lambda d: "dc-brackenford" in d.find_element(By.ID, "payload").get_attribute("value"))
    curl = browser.find_element(By.ID, "curl").text
    assert '-H "Authorization: Bearer $SLUICE_KEY"' in curl and KEY not in curl
