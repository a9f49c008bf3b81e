#!/usr/bin/python3
"""The workbench page in a real browser (headless Chromium through Selenium).

Usage: workbench_browser.py PINCHOFF PRESETS_DIR ARTIFACTS_DIR

Loads a preset, changes the source resistor and checks the shown drain voltage against
`pinchoff bias --json` for the edited file; steps a value through E24; enters a bad value and
checks the refusal carries the command line's message; renders the clip and checks an audio
element of the clip's duration appears; saves as a new file and reads it back with
`pinchoff bias`; keeps screenshots at two window sizes in ARTIFACTS_DIR and checks that they
are not blank. Exit status 0 when every check passes, 1 otherwise (77: no browser, skipped).
"""
import json
import os
import re
import shutil
import struct
import subprocess
import sys
import tempfile
import time
import zlib


def fail(message):
    print("workbench_browser: FAILED: " + message)
    sys.exit(1)


def distinct_pixels(png_path):
    """Distinct byte values of the decoded image rows (a blank page has two or three)."""
    data = open(png_path, "rb").read()
    pos, idat = 8, b""
    while pos < len(data):
        length, kind = struct.unpack(">I4s", data[pos:pos + 8])
        if kind == b"IDAT":
            idat += data[pos + 8:pos + 8 + length]
        pos += 12 + length
    return len(set(zlib.decompress(idat)))


def main():
    pinchoff, presets, artifacts = sys.argv[1:4]
    try:
        from selenium import webdriver
        from selenium.webdriver.common.by import By
        from selenium.webdriver.common.keys import Keys
        from selenium.webdriver.support.ui import WebDriverWait
    except ImportError:
        print("workbench_browser: python3-selenium is not installed (scripts/install-deps); skipped")
        return 77
    if not shutil.which("chromedriver"):
        print("workbench_browser: chromedriver is not installed (scripts/install-deps); skipped")
        return 77

    os.makedirs(artifacts, exist_ok=True)
    work = tempfile.mkdtemp(prefix="pinchoff-browser-")
    stage = os.path.join(work, "stage.toml")
    shutil.copy(os.path.join(presets, "bass-booster-9v.toml"), stage)
    server = subprocess.Popen([pinchoff, "workbench", stage], stderr=subprocess.PIPE, text=True)
    driver = None
    try:
        line = server.stderr.readline()
        m = re.search(r"(http://127\.0\.0\.1:\d+/\?token=[0-9a-f]+)", line)
        if not m:
            fail("no address printed: " + line)
        options = webdriver.ChromeOptions()
        options.add_argument("--headless=new")
        options.add_argument("--no-sandbox")
        options.add_argument("--disable-gpu")
        options.add_argument("--autoplay-policy=no-user-gesture-required")
        options.add_argument("--window-size=1280,900")
        options.binary_location = shutil.which("chromium") or "/usr/bin/chromium"
        driver = webdriver.Chrome(options=options)
        wait = WebDriverWait(driver, 20)
        driver.get(m.group(1))

        def count(name):
            return int(driver.execute_script("return document.body.dataset.%s || '0';" % name))

        def ready():
            wait.until(lambda d: count("answers") > 0)

        def field(key):
            return driver.find_element(By.CSS_SELECTOR, 'input[data-key="%s"]' % key)

        ready()
        driver.save_screenshot(os.path.join(artifacts, "workbench-1280x900.png"))

        # Change the source resistor; the page's drain voltage is bias's for the edited file.
        r = field("source.resistor")
        before = count("answers")
        r.send_keys(Keys.CONTROL, "a")
        r.send_keys("1k", Keys.TAB)
        wait.until(lambda d: count("answers") > before)
        if field("source.resistor").get_attribute("value") != "1k":
            fail("the typed value is not shown")
        shown = driver.find_element(By.CSS_SELECTOR, 'td[data-key="vd"]').text
        text = open(stage).read().replace('resistor = "680"', 'resistor = "1k"')
        edited = os.path.join(work, "edited.toml")
        open(edited, "w").write(text)
        vd = json.loads(subprocess.run([pinchoff, "bias", edited, "--json"], capture_output=True, text=True,
                                       check=True).stdout)["operating_point"]["vd_v"]
        value = float(shown.split()[0])
        if abs(value - vd) > 5e-4 * abs(vd):  # shown to 4 significant digits
            fail("drain voltage shown %s, bias gives %.6g V" % (shown, vd))

        # Step it up through E24: 1k is followed by 1.1k.
        r = field("source.resistor")
        r.click()
        before = count("answers")
        r.send_keys(Keys.ARROW_UP)
        wait.until(lambda d: count("answers") > before)
        if field("source.resistor").get_attribute("value") != "1.1k":
            fail("E24 after 1k: shown %r, not 1.1k" % field("source.resistor").get_attribute("value"))

        # A bad value: refused with the message the command line gives for that text.
        r = field("source.resistor")
        before = count("refusals")
        r.send_keys(Keys.CONTROL, "a")
        r.send_keys("-5k", Keys.TAB)
        try:
            wait.until(lambda d: count("refusals") > before)
        except Exception:
            fail("no refusal shown for -5k; status: %r, field: %r" % (driver.find_element(By.ID, "status").text,
                                                                     field("source.resistor").get_attribute("value")))
        why = driver.find_element(By.CSS_SELECTOR, ".why:not(:empty)").text
        bad = open(stage).read().replace('resistor = "680"', 'resistor = "-5k"')
        open(stage, "w").write(bad)
        cli = subprocess.run([pinchoff, "bias", stage], capture_output=True, text=True)
        open(stage, "w").write(text.replace('resistor = "1k"', 'resistor = "680"'))
        if cli.returncode != 2 or cli.stderr.strip() != "pinchoff bias: " + why:
            fail("refusal shown %r, the command line says %r" % (why, cli.stderr))

        # Pin and compare: the pinned response and harmonic profile are drawn beside the current.
        driver.find_element(By.ID, "pin").click()
        if not driver.find_elements(By.CSS_SELECTOR, "#resp path.pinned") or not driver.find_elements(By.CSS_SELECTOR, "#sweep path.pinned"):
            fail("pinning draws no pinned curve")

        # Render: an audio element with the clip's duration (the demo clip: 6.5 s).
        driver.find_element(By.ID, "render").click()
        WebDriverWait(driver, 120).until(lambda d: d.execute_script(
            "const a = document.getElementById('take-edited'); return a && isFinite(a.duration) && a.duration > 0;"))
        duration = driver.execute_script("return document.getElementById('take-edited').duration;")
        if abs(duration - 6.5) > 0.01:
            fail("the rendered take lasts %.3f s, the clip 6.5 s" % duration)

        # Save as a new file; the command line reads it back to the design shown (1.1k).
        target = os.path.join(work, "saved.toml")
        driver.find_element(By.ID, "save-path").send_keys(target)
        driver.find_element(By.ID, "save").click()
        wait.until(lambda d: d.find_element(By.ID, "save-state").text.startswith("saved"))
        saved = subprocess.run([pinchoff, "bias", target, "--json"], capture_output=True, text=True)
        if saved.returncode != 0:
            fail("the saved file does not read back: " + saved.stderr)
        open(edited, "w").write(text.replace('resistor = "1k"', 'resistor = "1.1k"'))
        want = subprocess.run([pinchoff, "bias", edited, "--json"], capture_output=True, text=True).stdout
        if json.loads(saved.stdout) != json.loads(want):
            import difflib
            fail("the saved file is not the design shown:\n" + "".join(difflib.unified_diff(
                open(edited).readlines(), open(target).readlines())))

        driver.save_screenshot(os.path.join(artifacts, "workbench-1280x900-edited.png"))
        driver.set_window_size(700, 1000)
        time.sleep(0.5)
        driver.save_screenshot(os.path.join(artifacts, "workbench-700x1000.png"))
        for name in ("workbench-1280x900.png", "workbench-1280x900-edited.png", "workbench-700x1000.png"):
            n = distinct_pixels(os.path.join(artifacts, name))
            if n < 16:
                fail("%s looks blank (%d distinct values)" % (name, n))
        print("workbench_browser: every check passed; screenshots in " + artifacts)
        return 0
    finally:
        if driver is not None:
            driver.quit()
        server.terminate()
        server.wait(timeout=10)
        shutil.rmtree(work, ignore_errors=True)


if __name__ == "__main__":
    sys.exit(main())
