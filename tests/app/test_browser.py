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
        driver.get(server.url)  # the address explore printed, its token included
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


def test_the_issue_walkthrough_te_cap_and_momentum_bound_three_pins_save_and_rebalance(demo_folder: Path, tmp_path: Path) -> None:
    """#15's "Done when", as a user does it: move the TE cap and the momentum bound, pin three variants,
    compare them, save one, and rebalance from the saved file to the same weights."""
    import json
    import subprocess
    import sys
    import urllib.request

    import numpy as np
    import pandas as pd
    import yaml
    from selenium.webdriver.common.by import By
    from selenium.webdriver.support.ui import WebDriverWait

    port = free_port()
    with explore_server(demo_folder / "base.yaml", port) as server, chromium() as driver:
        driver.get(server.url)
        wait_for_variant(driver, 1)
        set_value(driver, "n-tracking_error.max", "2.5")
        wait_for_variant(driver, 2)
        # the factor bounds the scenario does not set start folded: open the section, cap momentum at 0
        section = driver.find_element(By.CSS_SELECTOR, 'details[data-section="Factor exposure"]')
        if section.get_attribute("open") is None:
            section.find_element(By.TAG_NAME, "summary").click()
        set_value(driver, "n-factor_exposure.bounds.momentum.1", "0")
        wait_for_variant(driver, 3)
        rows = driver.find_elements(By.CSS_SELECTOR, "table.trail tbody tr")
        assert "momentum" in rows[0].text and "2.50%" in rows[0].text
        shown_te = driver.find_element(By.CSS_SELECTOR, '[data-figure="tracking_error"] .value').text
        for i in range(3):  # the trail redraws on each pin, so find the row again
            driver.find_elements(By.CSS_SELECTOR, "table.trail tbody tr")[i].find_element(By.CSS_SELECTOR, "button.pin").click()
        pinned = driver.find_element(By.CSS_SELECTOR, "#pinned table.pinned")
        assert sorted(h.text for h in pinned.find_elements(By.CSS_SELECTOR, "th.num")) == ["Variant 1", "Variant 2", "Variant 3"]
        assert len(driver.find_elements(By.CSS_SELECTOR, "#chart circle.point.pinned")) == 3
        # save the variant on show (variant 3) under a name of the user's
        name = driver.find_element(By.ID, "save-name")
        name.clear()
        name.send_keys("walkthrough_te25_mom0")
        driver.find_element(By.ID, "save-button").click()
        WebDriverWait(driver, 30).until(lambda d: d.find_element(By.ID, "save-message").text.startswith("Saved variant 3"))
        # the variant's own weights, from the API with the same changes
        body = json.dumps({"limits": {"tracking_error.max": 0.025, "factor_exposure.bounds.momentum.1": 0.0}}).encode()
        request = urllib.request.Request(f"http://127.0.0.1:{port}/api/solve", data=body, headers={"Content-Type": "application/json", "X-Trimtab-Token": server.token})
        document = json.loads(urllib.request.urlopen(request, timeout=60).read())
        errors = [e for e in driver.get_log("browser") if e["level"] == "SEVERE"]
        assert errors == [], errors
    assert f"{float(shown_te.rstrip('%')) / 100:.4f}" == f"{document['figures'][2]['post']:.4f}"
    saved = demo_folder / "walkthrough_te25_mom0.yaml"
    try:
        written = yaml.safe_load(saved.read_text(encoding="utf-8"))
        assert written["extends"] == "base.yaml"
        assert written["constraints"]["tracking_error"] == {"max": 0.025}
        assert written["constraints"]["factor_exposure"]["bounds"] == {"momentum": [None, 0.0]}
        out = tmp_path / "rerun"
        run = subprocess.run([sys.executable, "-m", "trimtab.cli", "rebalance", str(saved), "--out", str(out)],
                             capture_output=True, text=True, timeout=300)
        assert run.returncode == 0, run.stderr
        rerun = pd.read_csv(out / "target_book.csv", index_col="asset")["target_weight"]
        variant = pd.Series({r["asset"]: r["target_weight"] for r in document["target_book"]})
        np.testing.assert_allclose(rerun.sort_index(), variant.reindex(rerun.index).sort_index(), atol=1e-6)
    finally:
        saved.unlink(missing_ok=True)


def test_orders_not_fit_to_send_show_as_such_in_the_status_box_trail_chart_and_save(not_fit_scenario: Path) -> None:
    """#19: a variant whose rounded orders breach a limit is not shown as solved: the status names it,
    a red box lists each breached limit, the trail and the chart mark it, and Save says so."""
    from selenium.webdriver.common.by import By
    from selenium.webdriver.support.ui import WebDriverWait

    from trimtab.app import Explorer

    breached = list(Explorer.open(not_fit_scenario).solve({}).result.trade_list.breached["name"])
    port = free_port()
    with explore_server(not_fit_scenario, port) as server, chromium() as driver:
        driver.get(server.url)
        wait_for_variant(driver, 1)
        status = driver.find_element(By.ID, "status")
        assert status.text.startswith("Variant 1: orders not fit to send") and "bad" in status.get_attribute("class")
        items = driver.find_elements(By.CSS_SELECTOR, "#verdict .notfit li")
        assert [i.get_attribute("data-limit") for i in items] == breached
        assert all("on the rounded book against" in i.text and "beyond the tolerance" in i.text for i in items)
        cell = driver.find_elements(By.CSS_SELECTOR, "table.trail tbody tr td")[2]
        assert cell.text == "orders not fit to send" and "status-bad" in cell.get_attribute("class")
        assert len(driver.find_elements(By.CSS_SELECTOR, "#chart circle.point.notfit")) == 1
        name = driver.find_element(By.ID, "save-name")
        name.clear()
        name.send_keys("browser_not_fit")
        driver.find_element(By.ID, "save-button").click()
        message = driver.find_element(By.ID, "save-message")
        WebDriverWait(driver, 30).until(lambda d: message.text)
        assert "ORDERS ARE NOT FIT TO SEND" in message.text and "exits with 6" in message.text
        assert "bad" in message.get_attribute("class")
        assert (not_fit_scenario.parent / "browser_not_fit.yaml").exists()
        errors = [e for e in driver.get_log("browser") if e["level"] == "SEVERE"]
        assert errors == [], errors
