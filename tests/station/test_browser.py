"""The build-day flow in a real browser: Debian's headless Chromium driven by selenium.

Scan (decode the winder label's QR with zxing-cpp from the rendered labels PDF), open that URL,
record a dip, read the instruction, record the trim, record the dip on frequency, and watch the
day board (open in another window, never reloaded) change by itself. Screenshots go to the
test's tmp folder. Outside references: zxing-cpp decodes the QR codes we print; the trim amount
is checked against the proportional rule dL = L * df / f (common practice: f L is nearly
constant for a half-wave dipole).
"""

from __future__ import annotations

import re
import shutil
import urllib.parse
from pathlib import Path

import pytest

from tests.label_reading import label_codes

from .conftest import LiveStation

CHROMIUM = shutil.which("chromium") or shutil.which("chromium-browser")
DRIVER = shutil.which("chromedriver")
pytestmark = pytest.mark.skipif(not (CHROMIUM and DRIVER),
                                reason="Debian chromium and chromium-driver not installed "
                                "(.ci/run installs them)")
ELEMENT = "K02-75m"
FLAGS = ("--headless", "--no-sandbox", "--disable-gpu", "--disable-background-networking",
         "--disable-component-update", "--disable-sync", "--no-first-run",
         "--window-size=412,915")  # a phone held upright


def label_urls(pdf: Path) -> list[str]:
    """The QR code of every label of the labels PDF, decoded by zxing-cpp from a pypdfium2
    raster, once per label (a label may carry its code twice; tests/label_reading.py)."""
    return label_codes(pdf)


@pytest.fixture
def driver(tmp_path: Path):
    from selenium import webdriver
    from selenium.webdriver.chrome.service import Service

    options = webdriver.ChromeOptions()
    options.binary_location = CHROMIUM  # type: ignore[assignment]
    for flag in FLAGS:
        options.add_argument(flag)
    options.add_argument(f"--user-data-dir={tmp_path / 'chromium-profile'}")
    browser = webdriver.Chrome(service=Service(executable_path=DRIVER), options=options)
    browser.set_page_load_timeout(60)
    try:
        yield browser
    finally:
        browser.quit()


def test_scan_dip_trim_and_board(live_station: LiveStation, driver, tmp_path: Path) -> None:
    from selenium.common.exceptions import StaleElementReferenceException, WebDriverException
    from selenium.webdriver.common.by import By
    from selenium.webdriver.support.ui import WebDriverWait

    def shot(name: str) -> None:
        driver.save_screenshot(str(tmp_path / f"{name}.png"))

    def gone(element: object) -> bool:
        """True once ``element`` is no longer in the page (Chromium reports that in two ways)."""
        try:
            element.is_enabled()  # type: ignore[attr-defined]
        except (StaleElementReferenceException, WebDriverException):
            return True
        return False

    def send(form: str, **fields: str) -> None:
        for name, value in fields.items():
            box = driver.find_element(By.CSS_SELECTOR, f"#{form} [name={name}]")
            if box.tag_name == "select":
                box.find_element(By.CSS_SELECTOR, f"option[value='{value}']").click()
            else:
                box.clear()
                box.send_keys(value)
        old = driver.find_element(By.ID, form)
        driver.find_element(By.CSS_SELECTOR, f"#{form} button[type=submit]").click()
        # the answer is a new page: wait until the form sent is gone and the new one is loaded
        WebDriverWait(driver, 60).until(lambda d: gone(old))
        WebDriverWait(driver, 60).until(
            lambda d: d.execute_script("return document.readyState") == "complete")

    def board_text(css: str) -> str:
        """Text on the self-refreshing board (the table may be swapped while it is read)."""
        for _ in range(10):
            try:
                return driver.find_element(By.CSS_SELECTOR, css).text
            except StaleElementReferenceException:
                continue
        raise AssertionError(f"{css} kept changing")

    def board_state() -> str:
        return board_text(f"#row-{ELEMENT} .state")

    urls = label_urls(live_station.out / "labels.pdf")
    # The codes hold the address in capitals (QR alphanumeric mode); scheme and host do not
    # depend on case (RFC 3986 sections 3.1, 3.2.2), which urllib.parse reads back in lower case.
    base = urllib.parse.urlsplit(live_station.url)
    read = [urllib.parse.urlsplit(u) for u in urls]
    assert all((r.scheme, r.netloc.lower()) == (base.scheme, base.netloc) for r in read), urls
    mine = [u for u, r in zip(urls, read) if r.path == f"/E/{ELEMENT.upper()}"]
    assert len(mine) == 2, urls  # both legs' labels lead to the element page

    # The day board, open in its own window and never reloaded.
    driver.get(live_station.url + "/board")
    assert board_state() == "not cut"
    board = driver.current_window_handle
    shot("1-board-before")

    # The builder's phone: the URL the label's QR holds.
    driver.switch_to.new_window("window")
    driver.get(mine[0])
    assert driver.find_element(By.ID, "element").text.startswith(ELEMENT)
    assert driver.current_url == f"{live_station.url}/e/{ELEMENT}"  # redirected to its own case
    legs = driver.find_elements(By.CSS_SELECTOR, "#legs td.now")
    leg_m = float(re.match(r"([\d.]+) m", legs[0].text).group(1))
    shot("2-element")
    send("dip-form", dip="3.82 MHz", swr="1.6")
    say = driver.find_element(By.ID, "say").text
    shot("3-instruction")
    found = re.fullmatch(r"Shorten each leg by (\d+) mm \(.+ in\)", say)
    assert found, say
    amount_m = int(found.group(1)) / 1000
    rule = leg_m * (3.9e6 - 3.82e6) / 3.9e6  # dL = L df / f (common practice)
    assert amount_m == pytest.approx(rule, rel=0.25)

    send("trim-form", direction="removed", leg="both", amount=f"{found.group(1)} mm")
    assert "Trim" in driver.find_element(By.CSS_SELECTOR, ".notice").text
    history = driver.find_element(By.ID, "history").text
    assert f"{found.group(1)} mm" in history and "removed from each leg" in history
    send("dip-form", dip="3.9 MHz", swr="1.2")
    assert driver.find_element(By.ID, "say").text.startswith("Leave it")
    shot("4-on-frequency")

    # Back on the board window: it refreshes itself and shows the element tuned.
    driver.switch_to.window(board)
    WebDriverWait(driver, 30, poll_frequency=0.5).until(lambda d: board_state() == "tuned")
    row = board_text(f"#row-{ELEMENT}")
    assert "3.900 MHz" in row
    shot("5-board-after")
    assert all((tmp_path / f"{n}.png").stat().st_size > 1000
               for n in ("1-board-before", "3-instruction", "5-board-after"))
