"""The page in a real browser: headless Chromium moves the tracking-error control (#15)."""

from __future__ import annotations

from pathlib import Path

import pytest

from tests.app._browser import chromium, explore_server, free_port, missing, set_value, wait_for_variant

pytestmark = [pytest.mark.browser, pytest.mark.skipif(missing() is not None, reason=missing() or "")]


def test_moving_the_te_cap_re_solves_and_grows_the_trail_which_a_refresh_keeps(demo_folder: Path) -> None:
    from selenium.webdriver.common.by import By

    port = free_port()
    with explore_server(demo_folder / "base.yaml", port) as server, chromium() as driver:
        driver.get(f"http://127.0.0.1:{port}/")
        wait_for_variant(driver, 1)
        card = driver.find_element(By.CSS_SELECTOR, '[data-figure="tracking_error"] .value')
        assert card.text == "3.00%"
        set_value(driver, "n-tracking_error.max", "2.2")
        wait_for_variant(driver, 2)
        card = driver.find_element(By.CSS_SELECTOR, '[data-figure="tracking_error"] .value')
        assert card.text == "2.20%"
        rows = driver.find_elements(By.CSS_SELECTOR, "table.trail tbody tr")
        assert len(rows) == 2 and "tracking error max 2.20%" in rows[0].text
        assert len(driver.find_elements(By.CSS_SELECTOR, "#chart circle.point")) == 2
        assert driver.find_elements(By.CSS_SELECTOR, "#stress table.stress tbody tr")  # base.yaml runs shocks.yaml
        # the trail and its pins survive a refresh (the tab's sessionStorage), and restored variants still work
        rows[0].find_element(By.CSS_SELECTOR, "button.pin").click()
        driver.refresh()
        wait_for_variant(driver, 2)
        rows = driver.find_elements(By.CSS_SELECTOR, "table.trail tbody tr")
        assert len(rows) == 2 and "pinned" in rows[0].get_attribute("class")
        assert driver.find_element(By.ID, "n-tracking_error.max").get_attribute("value") == "2.2"
        assert driver.find_element(By.ID, "pinned-box").is_displayed()
        rows[1].find_element(By.CSS_SELECTOR, "button.show").click()
        assert driver.find_element(By.ID, "status").text.startswith("Variant 1:")
        card = driver.find_element(By.CSS_SELECTOR, '[data-figure="tracking_error"] .value')
        assert card.text == "3.00%"
        assert driver.find_element(By.ID, "n-tracking_error.max").get_attribute("value") == "3"
        set_value(driver, "n-tracking_error.max", "2.5")
        wait_for_variant(driver, 3)
        # a fresh trail on request
        driver.find_element(By.ID, "clear-trail").click()
        wait_for_variant(driver, 1)
        assert len(driver.find_elements(By.CSS_SELECTOR, "table.trail tbody tr")) == 1
        errors = [e for e in driver.get_log("browser") if e["level"] == "SEVERE"]
        assert errors == [], errors
    # Ctrl-C stopped the server cleanly
    out, err = server.output
    assert server.returncode == 0, err
    assert "Stopped" in out
