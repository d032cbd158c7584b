"""The page in a real browser: headless Chromium moves the tracking-error control (#15)."""

from __future__ import annotations

from pathlib import Path

import pytest

from tests.app._browser import chromium, explore_server, free_port, missing, set_value, wait_for_variant

pytestmark = [pytest.mark.browser, pytest.mark.skipif(missing() is not None, reason=missing() or "")]


def test_moving_the_te_cap_re_solves_and_grows_the_trail(demo_folder: Path) -> None:
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
        errors = [e for e in driver.get_log("browser") if e["level"] == "SEVERE"]
        assert errors == [], errors
    # Ctrl-C stopped the server cleanly
    out, err = server.output
    assert server.returncode == 0, err
    assert "Stopped" in out
