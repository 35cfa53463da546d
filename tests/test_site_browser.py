"""The static site in a real browser: headless Chromium driven by Selenium over the site built from
the bundled catalogue (gravicat.api.site, issue 19).

Checked on the index and on every entry page: no console error (the browser log), every link
resolves (a local file exists, and its anchor exists in it; the only links out are DOI links to
https://doi.org, which are not followed: the site needs no network), every MathML element is
present with a non-zero rendered size, and on the index typing in the search box filters the table.
Screenshots of the index and of the Kerr page are written to ``artifacts/`` at the top of the
repository (kept out of git).

Debian's ``chromium`` and ``chromium-driver`` are needed (``.ci/run`` installs them when it runs as
root); without them, or without selenium, the tests are SKIPPED and say why. The site is built once
for the module: every bundled entry, with Kerr and Schwarzschild verified first so that their pages
carry the exporters' downloads too.
"""

from __future__ import annotations

import os
import re
import shutil
from pathlib import Path
from urllib.parse import unquote, urlsplit

import pytest

ROOT = Path(__file__).resolve().parent.parent
ARTIFACTS = ROOT / "artifacts"
CHROMIUM = os.environ.get("GRAVICAT_CHROMIUM") or shutil.which("chromium") or "/usr/bin/chromium"
CHROMEDRIVER = os.environ.get("GRAVICAT_CHROMEDRIVER") or shutil.which("chromedriver") or "/usr/bin/chromedriver"
VERIFIED = ("kerr", "schwarzschild")


def _missing() -> str | None:
    try:
        import selenium  # noqa: F401
    except ImportError:
        return "selenium is not installed (pip install -e '.[test]')"
    for path, package in ((CHROMIUM, "chromium"), (CHROMEDRIVER, "chromium-driver")):
        if not (Path(path).is_file() and os.access(path, os.X_OK)):
            return f"{path} not found: install Debian's {package} (apt-get install -y chromium chromium-driver)"
    return None


if _missing():
    pytest.skip(f"BROWSER TESTS SKIPPED: {_missing()}; the site is not tested in a browser", allow_module_level=True)

from selenium import webdriver  # noqa: E402
from selenium.webdriver.chrome.service import Service  # noqa: E402
from selenium.webdriver.common.by import By  # noqa: E402


@pytest.fixture(scope="module")
def site(tmp_path_factory) -> Path:
    """The site of the bundled catalogue (Kerr and Schwarzschild verified), built once."""
    from sqlalchemy.orm import Session

    from gravicat.api.catalogue import Catalogue
    from gravicat.api.site import build_site, collect
    from gravicat.engine.fork import default_jobs
    from gravicat.registry import exporters, make_plugin_manager
    from gravicat.store.db import make_engine

    tmp = tmp_path_factory.mktemp("site")
    url = f"sqlite:///{tmp / 'cat.sqlite'}"
    with pytest.MonkeyPatch.context() as mp:
        for var in ("GRAVICAT_DB", "GRAVICAT_DISABLE_PLUGINS", "GRAVICAT_CLUSTER"):
            mp.delenv(var, raising=False)
        mp.setenv("GRAVICAT_CONFIG", str(tmp / "no-config.toml"))
        with Catalogue(url) as cat:
            cat.init()
            done = cat.verify(*VERIFIED, jobs=default_jobs())
            assert [v.status for v in done] == ["pass", "pass"], [(v.id, v.status) for v in done]
        engine = make_engine(url)
        with Session(engine) as session:
            entries = collect(session)
        engine.dispose()
        report = build_site(entries, tmp / "out", exporters=exporters(make_plugin_manager()), jobs=default_jobs())
    assert report.problems == [] and len(report.rendered) == len(entries) > 50
    return tmp / "out"


@pytest.fixture(scope="module")
def browser():
    opts = webdriver.ChromeOptions()
    opts.binary_location = CHROMIUM
    for arg in ("--headless=new", "--no-sandbox", "--disable-gpu", "--disable-dev-shm-usage",
                "--window-size=1280,1600", "--disable-extensions", "--no-first-run", "--lang=en"):
        opts.add_argument(arg)
    opts.set_capability("goog:loggingPrefs", {"browser": "ALL"})
    driver = webdriver.Chrome(service=Service(CHROMEDRIVER), options=opts)
    driver.set_page_load_timeout(30)
    try:
        yield driver
    finally:
        driver.quit()


_IDS = re.compile(r'\sid="([^"]+)"')
_ids_of: dict[Path, set[str]] = {}


def _ids(path: Path) -> set[str]:
    if path not in _ids_of:
        _ids_of[path] = set(_IDS.findall(path.read_text(encoding="utf-8")))
    return _ids_of[path]


def _open(driver, path: Path) -> list[str]:
    """Load ``path``; the problems found there (console errors, links that do not resolve, MathML
    without a rendered size)."""
    driver.get(path.as_uri())
    problems = [f"console: {m['message']}" for m in driver.get_log("browser") if m["level"] == "SEVERE"]
    links = driver.execute_script(
        "return Array.from(document.querySelectorAll('a[href], img[src], link[href], script[src]'))"
        ".map(e => e.href || e.src);")
    for link in links:
        parts = urlsplit(link)
        if parts.scheme == "file":
            target = Path(unquote(parts.path))
            if not target.is_file():
                problems.append(f"link to a missing file: {link}")
            elif parts.fragment and target.suffix == ".html" and unquote(parts.fragment) not in _ids(target):
                problems.append(f"link to a missing anchor: {link}")
        elif parts.scheme == "https":
            if parts.netloc != "doi.org" or len(parts.path) < 5:
                problems.append(f"a link out of the site that is not a DOI: {link}")
        elif parts.scheme != "data":
            problems.append(f"a link the site cannot serve: {link}")
    sizes = driver.execute_script(
        "return Array.from(document.getElementsByTagName('math')).map(m => {"
        " const r = m.getBoundingClientRect(); return [r.width, r.height, m.getAttribute('aria-label')]; });")
    problems += [f"MathML without a rendered size: {label} ({w} x {h})" for w, h, label in sizes
                 if not (w > 0 and h > 0)]
    return problems


def _screenshot(driver, name: str) -> Path:
    ARTIFACTS.mkdir(exist_ok=True)
    height = driver.execute_script("return document.documentElement.scrollHeight;")
    driver.set_window_size(1280, min(max(800, int(height)), 8000))
    path = ARTIFACTS / name
    assert driver.save_screenshot(str(path)), f"no screenshot written to {path}"
    driver.set_window_size(1280, 1600)
    return path


def _visible_rows(driver) -> list[str]:
    return driver.execute_script(
        "return Array.from(document.querySelectorAll('#entries tbody tr')).filter(r => !r.hidden)"
        ".map(r => r.getAttribute('data-text'));")


def test_index_loads_its_links_resolve_and_the_search_filters(site, browser):
    problems = _open(browser, site / "index.html")
    assert problems == []
    pages = sorted((site / "entries").glob("*.html"))
    rows = _visible_rows(browser)
    assert len(rows) == len(pages) > 50  # every entry listed, all shown before a search
    count = browser.find_element(By.ID, "match-count")
    assert count.text == f"{len(rows)} of {len(rows)} entries shown"
    search = browser.find_element(By.ID, "search")
    assert search.is_displayed()  # the form is shown by the script
    search.send_keys("kerr")
    shown = _visible_rows(browser)
    assert 0 < len(shown) < len(rows) and all("kerr" in text for text in shown)
    assert {"kerr", "schwarzschild"} & {t.split()[0] for t in shown} == {"kerr"}
    assert count.text == f"{len(shown)} of {len(rows)} entries shown"
    search.send_keys(" de-sitter")  # every word must match
    narrower = _visible_rows(browser)
    assert 0 < len(narrower) < len(shown) and all("de-sitter" in t and "kerr" in t for t in narrower)
    search.clear()
    search.send_keys("no-such-spacetime-anywhere")
    assert _visible_rows(browser) == []
    search.clear()
    search.send_keys(" ")  # an input event with no words: everything again
    assert len(_visible_rows(browser)) == len(rows)
    browser.get((site / "index.html").as_uri())  # a fresh page for the screenshot
    assert _screenshot(browser, "site-index.png").stat().st_size > 10_000


def test_every_entry_page_loads_with_resolving_links_and_sized_mathml(site, browser):
    pages = sorted((site / "entries").glob("*.html"))
    problems, maths = {}, 0
    for page in pages:
        found = _open(browser, page)
        if found:
            problems[page.stem] = found
        maths += browser.execute_script("return document.getElementsByTagName('math').length;")
    assert problems == {}
    assert maths >= 2 * len(pages)  # at least a line element per chart, and domains


def test_kerr_page_in_the_browser(site, browser):
    page = site / "entries" / "kerr.html"
    assert _open(browser, page) == []
    maths = browser.find_elements(By.TAG_NAME, "math")
    assert len(maths) >= 3
    line = browser.find_element(By.CSS_SELECTOR, "math[aria-label^='line element of']")
    assert line.size["width"] > 200 and line.size["height"] > 10  # a whole line element, typeset
    figure = browser.find_element(By.CSS_SELECTOR, "#orbits figure img")
    assert figure.get_attribute("alt").startswith("Effective potential")
    assert browser.execute_script("return arguments[0].complete && arguments[0].naturalWidth > 0;", figure)
    downloads = [a.get_attribute("href") for a in browser.find_elements(By.CSS_SELECTOR, "#downloads a[download]")]
    assert len(downloads) >= 5  # the metric file and the exporters' files of a verified revision
    assert _screenshot(browser, "site-kerr.png").stat().st_size > 10_000
