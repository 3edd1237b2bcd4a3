"""Every page in a real browser: Debian's chromium driven through selenium, networking off.

One function, :func:`check_page`, opens a page and returns its problems: console errors,
requests that leave the file, a slow load, too heavy a file. It runs over every ``*.html``
under the output folder of the session's processed test study, over a copy of one page
with a broken script (which it must report), and over the pages of a tiny study whose
labels are hostile HTML (which must show as text and run nothing).

Hostile labels: heschl's definition checks refuse none of the four. The participant id
comes from the file name through the site's ``subject_pattern``; the default pattern takes
letters and digits only (any other text ends the id), so the test study declares a wider
pattern. Site, marker and feature names are taken as written.

The module is skipped when ``chromium`` or ``chromedriver`` is not on PATH, unless the
environment variable ``CI`` is set (``.ci/run`` sets it): there a missing browser fails.
"""
import json
import os
import re
import shutil
import time
from pathlib import Path

import pytest

CHROMIUM = shutil.which("chromium")
CHROMEDRIVER = shutil.which("chromedriver")
UNDER_CI = bool(os.environ.get("CI"))

if not UNDER_CI:
    if not (CHROMIUM and CHROMEDRIVER):
        pytest.skip("chromium and chromedriver are not on PATH (set CI=1 to make this a failure)",
                    allow_module_level=True)
    pytest.importorskip("selenium", reason="selenium is not installed (pip install -e '.[test]')")

#: Limits of issue 9: a page loads in under 2 s and weighs under 3 MB.
MAX_LOAD_S = 2.0
MAX_BYTES = 3_000_000
WINDOW = (1280, 900)

#: Hostile text for each label, named by a word of its own so that each can be found.
#: The participant id is read from a file name, which cannot hold "/", so its text cannot
#: close a script element; it opens one and carries an onerror handler instead.
HOSTILE = {
    "site": "site\"'><script>window.__pwned=1;alert(1)</script>",
    "marker": "marker\"'><script>window.__pwned=1;alert(1)</script>",
    "feature": "feature\"'><script>window.__pwned=1;alert(1)</script>",
    "participant": "id\"'><img src=x onerror=window.__pwned=1;alert(1)><script>",
}
#: Run before every document: alert, confirm and prompt record their text and open nothing.
RECORD_DIALOGS = """
window.__dialogs = [];
for (const name of ["alert", "confirm", "prompt"]) {
  window[name] = (message) => { window.__dialogs.push(name + ": " + String(message)); return null; };
}
"""
#: What the broken page runs: a call of a function that does not exist.
BROKEN_SCRIPT = "<script>undefined_function()</script>"


# --------------------------------------------------------------------------- the browser
@pytest.fixture(scope="module")
def driver(tmp_path_factory):
    """Headless chromium, with a fresh profile and every outside request sent nowhere."""
    if not (CHROMIUM and CHROMEDRIVER):
        pytest.fail("CI is set but chromium or chromedriver is not on PATH; "
                    "install Debian's chromium and chromium-driver (see .ci/run)")
    from selenium import webdriver
    from selenium.webdriver.chrome.service import Service

    options = webdriver.ChromeOptions()
    options.binary_location = CHROMIUM
    profile = tmp_path_factory.mktemp("chromium-profile")
    for argument in ("--headless=new", "--no-sandbox", "--disable-gpu", "--disable-dev-shm-usage",
                     f"--window-size={WINDOW[0]},{WINDOW[1]}", f"--user-data-dir={profile}",
                     "--disable-background-networking", "--disable-component-update",
                     "--disable-sync", "--disable-default-apps", "--disable-extensions",
                     "--no-first-run", "--no-default-browser-check", "--metrics-recording-only",
                     "--disable-domain-reliability", "--disable-client-side-phishing-detection",
                     # Any request for another address goes to a closed port and fails.
                     "--proxy-server=127.0.0.1:9", "--proxy-bypass-list=",
                     "--host-resolver-rules=MAP * ~NOTFOUND"):
        options.add_argument(argument)
    options.set_capability("goog:loggingPrefs", {"browser": "ALL", "performance": "ALL"})
    options.set_capability("unhandledPromptBehavior", "ignore")
    # An explicit driver path: selenium's own driver finder (which downloads) never runs.
    browser = webdriver.Chrome(service=Service(executable_path=CHROMEDRIVER), options=options)
    browser.set_page_load_timeout(30)
    browser.get("about:blank")
    # The window holds the browser's own bars; the page's viewport is set exactly.
    browser.execute_cdp_cmd("Emulation.setDeviceMetricsOverride", {
        "width": WINDOW[0], "height": WINDOW[1], "deviceScaleFactor": 1, "mobile": False})
    # Before any page script: dialogs are recorded instead of opened, so none blocks.
    browser.execute_cdp_cmd("Page.addScriptToEvaluateOnNewDocument", {"source": RECORD_DIALOGS})
    try:
        yield browser
    finally:
        browser.quit()


def _requests(performance_log):
    """URLs the page asked for, from the performance (DevTools Network) log.

    Requests made by the browser's own pages (its new-tab page at start-up, whose
    document is a ``chrome:`` URL) are not the page's and are left out.
    """
    urls = []
    for entry in performance_log:
        message = json.loads(entry["message"])["message"]
        if message.get("method") != "Network.requestWillBeSent":
            continue
        if not message["params"].get("documentURL", "").startswith(("chrome:", "chrome-untrusted:")):
            urls.append(message["params"]["request"]["url"])
    return urls


def _dialogs(driver):
    """Dialogs the page tried to open (recorded by RECORD_DIALOGS), and any left open."""
    from selenium.common.exceptions import NoAlertPresentException

    try:
        alert = driver.switch_to.alert
        opened = [f"open dialog: {alert.text}"]
        alert.dismiss()
    except NoAlertPresentException:
        opened = []
    return opened + driver.execute_script("return window.__dialogs || [];")


def _load_seconds(driver):
    """navigationStart to loadEventEnd (Navigation Timing API), s; waits for the load end."""
    deadline = time.monotonic() + 10
    while True:
        start, end = driver.execute_script(
            "const t = performance.timing; return [t.navigationStart, t.loadEventEnd];")
        if end > 0 or time.monotonic() > deadline:
            return (end - start) / 1000.0 if end > 0 else float("inf")
        time.sleep(0.02)


def check_page(driver, path, screenshots=None):
    """Open one page file and return its problems (an empty list when it is clean).

    Parameters
    ----------
    driver : selenium.webdriver.Chrome
        The browser.
    path : pathlib.Path
        The page, a self-contained ``.html`` file.
    screenshots : pathlib.Path, optional
        Folder for a screenshot of the first screenful (its path is printed).

    Returns
    -------
    list of str
        One line per problem: an over-weight file, a console error, a request that is
        neither ``data:`` nor the page's own file, a dialog (alert, confirm, prompt), a
        load of 2 s or more.
    """
    problems = []
    size = path.stat().st_size
    if size >= MAX_BYTES:
        problems.append(f"weighs {size / 1e6:.2f} MB, the limit is {MAX_BYTES / 1e6:.0f} MB")
    driver.get_log("browser"), driver.get_log("performance")  # drop entries of earlier pages
    driver.get(path.as_uri())
    seconds = _load_seconds(driver)
    problems += [f"called {dialog!r}" for dialog in _dialogs(driver)]
    own = {path.as_uri(), driver.current_url.split("#")[0]}
    if seconds >= MAX_LOAD_S:
        problems.append(f"took {seconds:.2f} s to load, the limit is {MAX_LOAD_S:.0f} s")
    timed = driver.execute_script(
        "return performance.getEntriesByType('resource').map(e => e.name);")
    for url in sorted(set(_requests(driver.get_log("performance")) + timed)):
        if not (url.startswith("data:") or url.split("#")[0] in own):
            problems.append(f"requested {url[:120]}")
    for entry in driver.get_log("browser"):
        if entry["level"] == "SEVERE":
            problems.append(f"console error: {entry['message'][:300]}")
    if screenshots is not None:
        number = len(list(screenshots.glob("*.png")))  # pages in two folders may share a name
        shot = screenshots / f"{number:03d}_{re.sub(r'[^A-Za-z0-9_.-]+', '-', path.stem)[:100]}.png"
        driver.save_screenshot(str(shot))
        print(f"screenshot of {path.name}: {shot}")
    return problems


def _pages(output):
    pages = sorted(Path(output).rglob("*.html"))
    assert pages, f"no .html page under {output}"
    return pages


# --------------------------------------------------------------------------- the demo pages
def test_every_page_is_clean(driver, processed_study, tmp_path):
    """No console error, no outside request, under 2 s and 3 MB, for every page."""
    study, _ = processed_study
    pages = _pages(study.output)
    assert any(p.name == "review.html" for p in pages), "the study page is missing"
    problems = {p.relative_to(study.output).as_posix(): check_page(driver, p, tmp_path)
                for p in pages}
    bad = {name: found for name, found in problems.items() if found}
    assert not bad, json.dumps(bad, indent=1)


def test_a_broken_page_is_caught(driver, processed_study, tmp_path):
    """A real page with a script calling an undefined function fails the same check."""
    study, _ = processed_study
    page = _pages(study.output)[0]
    broken = tmp_path / "broken.html"
    html = page.read_text(encoding="utf-8")
    broken.write_text(html.replace("</body>", BROKEN_SCRIPT + "</body>", 1)
                      if "</body>" in html else html + BROKEN_SCRIPT, encoding="utf-8")
    problems = check_page(driver, broken)
    assert any("console error" in p and "undefined_function" in p for p in problems), problems


def test_an_outside_request_is_caught(driver, processed_study, tmp_path):
    """An image from another address is reported (and never arrives: the proxy goes nowhere)."""
    study, _ = processed_study
    page = _pages(study.output)[0]
    leaky = tmp_path / "leaky.html"
    leaky.write_text(page.read_text(encoding="utf-8") + '<img src="http://192.0.2.1/x.png">',
                     encoding="utf-8")
    assert any(p.startswith("requested http://192.0.2.1/") for p in check_page(driver, leaky))


# --------------------------------------------------------------------------- hostile labels
def _hostile_study(root):
    """One Cedar oddball recording whose participant id, site, marker and feature are hostile.

    Where heschl takes each label from:

    - participant id: the file name, through the site's ``subject_pattern``. The default
      pattern takes letters and digits only, so a study must declare a wider pattern to
      get such an id; with it, the id is accepted.
    - site name: the ``[sites.<name>]`` key of the study file; accepted.
    - marker name: the paradigm's ``conditions.<name>.markers`` and the site's code map;
      accepted.
    - feature name: a measure's ``name`` in the feature-set file; accepted (names built
      from kind, signal and region are reduced to letters, digits and "_", given ones are
      not).
    """
    from heschl.config.files import builtin_dir
    from heschl.synth import write_recording

    folder = root / "raw" / "cedar"
    record = write_recording(folder, site="cedar", paradigm="oddball", subject="A01",
                             group="control", seed=7, size="test")
    (main,) = [name for name in record["files"] if name.endswith(".fif")]
    pid, site, marker = HOSTILE["participant"], HOSTILE["site"], HOSTILE["marker"]
    (folder / main).rename(folder / main.replace("sub-A01", f"sub-{pid}"))
    (root / "participants.tsv").write_text(
        f"participant_id\tsite\tgroup\nsub-{pid}\t{site}\tcontrol\n", encoding="utf-8")
    paradigm = (builtin_dir("paradigms") / "oddball.toml").read_text(encoding="utf-8")
    assert 'markers = ["deviant"]' in paradigm and re.search(r'^method = "adaptive"', paradigm, re.M)
    paradigm = paradigm.replace('markers = ["deviant"]', f"markers = [{json.dumps(marker)}]")
    # Fixed thresholds instead of learned ones keep the test fast (seconds, not tens).
    paradigm = re.sub(r'^method = "adaptive".*$', 'method = "fixed"\npeak_to_peak_uv = 200.0',
                      paradigm, flags=re.M)
    paradigm = re.sub(r"^(detection_high_pass|max_cluster) = .*\n", "", paradigm, flags=re.M)
    (root / "oddball.toml").write_text(paradigm, encoding="utf-8")
    features = (builtin_dir("features") / "oddball-core.toml").read_text(encoding="utf-8")
    # Fewer resamples keep the test fast; the pages show the same sections.
    for old, new in (('name = "mismatch_peak_latency"', f"name = {json.dumps(HOSTILE['feature'])}"),
                     ("bootstrap = 150", "bootstrap = 20"), ("splits = 30", "splits = 2")):
        assert old in features, old
        features = features.replace(old, new)
    (root / "features.toml").write_text(features, encoding="utf-8")
    key = json.dumps(site)
    (root / "study.toml").write_text("\n".join([
        'name = "Hostile labels"', 'output = "derivatives/heschl"',
        'participants = "participants.tsv"',
        "[[analyses]]", 'paradigm = "oddball.toml"', 'feature_sets = ["features.toml"]',
        f"[sites.{key}]", 'recording_reference = "average"', "line_frequency = 50.0",
        'eog_channels = ["HEOG", "VEOG"]', r'subject_pattern = "^sub-(.+)_task-"',
        f"[sites.{key}.files]", 'oddball = "raw/cedar/sub-*_task-oddball_raw.fif"',
        f"[sites.{key}.markers.oddball]", '"1" = "standard"', f'"2" = {json.dumps(marker)}',
        ""]), encoding="utf-8")
    return root / "study.toml"


def test_hostile_labels_show_as_text(driver, tmp_path):
    """Labels holding markup render as visible text on the pages and run nothing."""
    import markupsafe
    from selenium.webdriver.common.by import By

    from heschl.batch import run_study
    from heschl.config import load_study
    from heschl.inputs import discover

    study = load_study(_hostile_study(tmp_path / "hostile"))
    (recording,) = discover(study)
    assert recording.participant_id == f"sub-{HOSTILE['participant']}"
    assert recording.site == HOSTILE["site"]
    run_study(study, jobs=1)
    pages = _pages(study.output)
    assert len(pages) >= 2, pages  # the recording page and the study page
    shown = {label: [] for label in HOSTILE}
    for page in pages:
        assert check_page(driver, page) == [], page.name
        assert driver.execute_script("return typeof window.__pwned;") == "undefined", page.name
        assert driver.execute_script("return document.querySelectorAll('img[src=\"x\"]').length;") == 0
        text = driver.find_element(By.TAG_NAME, "body").text
        for label, hostile in HOSTILE.items():
            if hostile in text:
                shown[label].append(page.name)
    missing = [label for label, where in shown.items() if not where]
    assert not missing, f"not shown as text on any page: {missing}; shown: {shown}"
    # The same checks catch the labels left unescaped: a copy of a page with its escaped
    # labels put back as markup runs their script and reports it.
    page = next(p for p in pages if p.name != "review.html")
    html = page.read_text(encoding="utf-8")
    for hostile in HOSTILE.values():
        html = html.replace(str(markupsafe.escape(hostile)), hostile)
    unescaped = tmp_path / "unescaped.html"
    unescaped.write_text(html, encoding="utf-8")
    problems = check_page(driver, unescaped)
    assert any(p.startswith("called 'alert") for p in problems), problems
    assert driver.execute_script("return typeof window.__pwned;") == "number"
