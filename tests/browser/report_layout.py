"""Opens stet reports in headless Chromium and checks how they lay out.

Usage: report_layout.py SCREENSHOT_DIR REPORT.html[:MAX_PAGES]...

For each report, at 1400 and 420 CSS px: the page is never wider than the window;
every table wider than its card sits in a scrolling container; at 420 px no SVG text
renders under 11 CSS px; the console stays free of errors; nothing is fetched but the
report itself. A report given with `:MAX_PAGES` is also printed to A4 and must take at
most that many pages. A full-page screenshot of each goes to SCREENSHOT_DIR. Prints one line
per problem and exits 1 when there is any.
"""

import base64
import json
import pathlib
import re
import shutil
import sys

from selenium import webdriver

WIDTHS = (1400, 420)
# The smallest SVG text a phone reader should get, in CSS px (issue 16).
SMALLEST_TEXT_AT_NARROW = 11.0
# Screenshots taller than this are cut, so a 200-row sweep stays a reasonable file.
MAX_SHOT_HEIGHT = 16000

PAGE_WIDTH = "return [document.documentElement.scrollWidth, window.innerWidth];"

# Tables wider than their card (the step section, else the main column) must have an
# ancestor below the card that scrolls sideways.
UNSCROLLED_TABLES = """
const found = [];
for (const table of document.querySelectorAll('table')) {
  const card = table.closest('section.step') || table.closest('main') || document.body;
  if (table.getBoundingClientRect().width <= card.clientWidth + 1) continue;
  let scrolls = false;
  for (let node = table.parentElement; node && node !== card; node = node.parentElement) {
    const overflow = getComputedStyle(node).overflowX;
    if ((overflow === 'auto' || overflow === 'scroll') && node.clientWidth <= card.clientWidth + 1) {
      scrolls = true;
      break;
    }
  }
  if (!scrolls) found.push((card.id || card.tagName) + ': ' + table.className);
}
return found;
"""

# Each SVG text's rendered font size: its computed size times the scale from its
# user units to CSS px (the length of the screen transform's first column, so rotated
# axis titles count too).
SMALL_SVG_TEXT = """
const found = [];
for (const text of document.querySelectorAll('svg text')) {
  if (!text.textContent.trim()) continue;
  const size = parseFloat(getComputedStyle(text).fontSize) * Math.hypot(text.getScreenCTM().a, text.getScreenCTM().b);
  if (size < arguments[0]) {
    const card = text.closest('section.step');
    found.push((card ? card.id : '?') + ': "' + text.textContent.trim() + '" ' + size.toFixed(1) + ' px');
  }
}
return found;
"""


def browser():
    options = webdriver.ChromeOptions()
    for flag in ("--headless=new", "--no-sandbox", "--disable-gpu", "--hide-scrollbars",
                 "--disable-background-networking", "--disable-component-update",
                 "--no-first-run"):
        options.add_argument(flag)
    options.set_capability("goog:loggingPrefs", {"browser": "ALL", "performance": "ALL"})
    options.binary_location = shutil.which("chromium")
    # Naming the driver keeps selenium from looking for one on the network.
    service = webdriver.ChromeService(executable_path=shutil.which("chromedriver"))
    return webdriver.Chrome(options=options, service=service)


def set_viewport(driver, width, height):
    driver.execute_cdp_cmd("Emulation.setDeviceMetricsOverride", {
        "width": width, "height": height, "deviceScaleFactor": 1, "mobile": False})


def requests_made(driver, report_url):
    """URLs the page asked for, other than the report and inline data."""
    urls = []
    for entry in driver.get_log("performance"):
        message = json.loads(entry["message"])["message"]
        if message.get("method") != "Network.requestWillBeSent":
            continue
        url = message["params"]["request"]["url"]
        if url != report_url and not url.startswith("data:"):
            urls.append(url)
    return urls


def console_errors(driver):
    return [e["message"] for e in driver.get_log("browser") if e["level"] == "SEVERE"]


def check(driver, report, width, shots):
    problems = []
    url = report.resolve().as_uri()
    # Logs left from the page before (an earlier report, its printing) are not this one's.
    driver.get_log("performance")
    driver.get_log("browser")
    set_viewport(driver, width, 900)
    driver.get(url)
    where = f"{report.name} at {width} px"
    page, window = driver.execute_script(PAGE_WIDTH)
    if page > window:
        problems.append(f"{where}: the page is {page} px wide in a {window} px window")
    for table in driver.execute_script(UNSCROLLED_TABLES):
        problems.append(f"{where}: a table wider than its card does not scroll: {table}")
    if width < 600:
        for text in driver.execute_script(SMALL_SVG_TEXT, SMALLEST_TEXT_AT_NARROW):
            problems.append(f"{where}: SVG text under {SMALLEST_TEXT_AT_NARROW} px: {text}")
    for message in console_errors(driver):
        problems.append(f"{where}: console error: {message}")
    for fetched in requests_made(driver, url):
        problems.append(f"{where}: fetched {fetched}")
    height = driver.execute_script("return document.documentElement.scrollHeight;")
    set_viewport(driver, width, min(height, MAX_SHOT_HEIGHT))
    driver.save_screenshot(str(shots / f"{report.stem}-{width}.png"))
    return problems


def printed_pages(driver, report, shots):
    """Prints the report as the browser's print dialog would, to A4, and counts pages.
    Chromium writes each page as an uncompressed `/Type /Page` object."""
    driver.get(report.resolve().as_uri())
    pdf = base64.b64decode(driver.execute_cdp_cmd("Page.printToPDF", {
        "paperWidth": 8.27, "paperHeight": 11.69, "preferCSSPageSize": True})["data"])
    (shots / f"{report.stem}.pdf").write_bytes(pdf)
    return len(re.findall(rb"/Type\s*/Page(?!s)", pdf))


def main():
    shots = pathlib.Path(sys.argv[1])
    shots.mkdir(parents=True, exist_ok=True)
    driver = browser()
    problems = []
    try:
        for argument in sys.argv[2:]:
            name, _, max_pages = argument.partition(":")
            for width in WIDTHS:
                problems += check(driver, pathlib.Path(name), width, shots)
            if max_pages:
                pages = printed_pages(driver, pathlib.Path(name), shots)
                if pages > int(max_pages):
                    problems.append(f"{name} prints on {pages} A4 pages, more than {max_pages}")
    finally:
        driver.quit()
    for problem in problems:
        print(problem)
    sys.exit(1 if problems else 0)


if __name__ == "__main__":
    main()
