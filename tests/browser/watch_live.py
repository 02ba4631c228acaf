"""Keeps one page of `stet watch` open in headless Chromium across an edit of the
document and checks that the new text appears without a navigation, that the step the
reader had scrolled to stays where it was on screen, and that the page's policy let its
script run (no console errors).

Usage: watch_live.py URL DOCUMENT OLD_TEXT NEW_TEXT STEP_ID
Exit 0 when the page updated in place; prints why and exits 1 otherwise.
"""

import shutil
import sys
import time

from selenium import webdriver
from selenium.webdriver.chrome.options import Options
from selenium.webdriver.chrome.service import Service

PATIENCE_SECONDS = 20


def main():
    url, document, old_text, new_text, step_id = sys.argv[1:6]
    options = Options()
    options.add_argument("--headless=new")
    options.add_argument("--no-sandbox")
    options.set_capability("goog:loggingPrefs", {"browser": "ALL"})
    # The installed browser and driver, named so selenium does not look for others.
    options.binary_location = shutil.which("chromium")
    driver = webdriver.Chrome(options=options, service=Service(shutil.which("chromedriver")))
    driver.set_window_size(800, 600)
    try:
        driver.get(url)
        wait_for(driver, lambda: old_text in body_text(driver), "the first report")
        # Marks this page: a navigation or reload would make a new window object. An
        # edit made before the page's stream connects still arrives: the stream's first
        # event is the current report.
        driver.execute_script("window.stetSamePage = 'kept';")
        driver.execute_script(f"document.getElementById('{step_id}').scrollIntoView();")
        before = top_of(driver, step_id)

        with open(document, encoding="utf-8") as file:
            text = file.read()
        with open(document, "w", encoding="utf-8") as file:
            file.write(text.replace(old_text, new_text))

        first_line = new_text.splitlines()[0]
        wait_for(driver, lambda: first_line in body_text(driver), "the edit to appear")
        kept = driver.execute_script("return window.stetSamePage;")
        if kept != "kept":
            fail("the page was reloaded instead of updated in place")
        after = top_of(driver, step_id)
        # Within a few pixels: the text above the step grew by several paragraphs.
        if abs(after - before) > 5:
            fail(f"step {step_id} moved from {before}px to {after}px on screen")
        # The browser's own request for /favicon.ico is answered 404, as it should be.
        errors = [
            entry
            for entry in driver.get_log("browser")
            if entry["level"] == "SEVERE" and "favicon.ico" not in entry["message"]
        ]
        if errors:
            fail(f"console errors: {errors}")
    finally:
        driver.quit()


def body_text(driver):
    return driver.execute_script("return document.body.innerText;")


def top_of(driver, element_id):
    return driver.execute_script(
        f"return document.getElementById('{element_id}').getBoundingClientRect().top;"
    )


def wait_for(driver, condition, what):
    deadline = time.monotonic() + PATIENCE_SECONDS
    while not condition():
        if time.monotonic() > deadline:
            fail(f"waited {PATIENCE_SECONDS} s for {what}; page text: {body_text(driver)[:500]!r}")
        time.sleep(0.1)


def fail(message):
    print(message)
    sys.exit(1)


if __name__ == "__main__":
    main()
