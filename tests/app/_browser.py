"""Run ``trimtab explore`` in a subprocess and drive headless Chromium against it (browser tests)."""

from __future__ import annotations

import os
import shutil
import signal
import socket
import subprocess
import sys
import tempfile
import time
import urllib.request
from collections.abc import Iterator
from contextlib import contextmanager
from pathlib import Path
from typing import Any

CHROMIUM = shutil.which("chromium") or ("/usr/bin/chromium" if Path("/usr/bin/chromium").exists() else None)
CHROMEDRIVER = shutil.which("chromedriver") or ("/usr/bin/chromedriver" if Path("/usr/bin/chromedriver").exists() else None)
FLAGS = ("--headless", "--no-sandbox", "--disable-gpu", "--disable-quic", "--no-first-run",
         "--disable-background-networking", "--disable-component-update", "--disable-sync")


def missing() -> str | None:
    """Why the browser tests cannot run here, or None."""
    if CHROMIUM is None or CHROMEDRIVER is None:
        return "needs chromium and chromedriver (Debian packages chromium and chromium-driver)"
    try:
        import selenium  # noqa: F401
    except ImportError:
        return "needs selenium (pip install -e '.[test]')"
    return None


def free_port() -> int:
    with socket.socket() as probe:
        probe.bind(("127.0.0.1", 0))
        return int(probe.getsockname()[1])


@contextmanager
def explore_server(scenario: Path, port: int, host: str = "127.0.0.1") -> Iterator[subprocess.Popen[str]]:
    """``trimtab explore SCENARIO --no-browser --port PORT --host HOST`` until it answers; Ctrl-C on leaving.

    The process gets ``url``: the address the command printed, its token included, as a user would
    copy it (issue #20: the page and the API answer only with the token).
    """
    import queue
    import re
    import threading

    process = subprocess.Popen(
        [sys.executable, "-m", "trimtab.cli", "explore", str(scenario), "--no-browser", "--port", str(port), "--host", host],
        stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True,
    )
    lines: queue.Queue[str] = queue.Queue()
    seen: list[str] = []

    def read() -> None:
        assert process.stdout is not None
        for line in process.stdout:
            lines.put(line)

    reader = threading.Thread(target=read, daemon=True)
    reader.start()
    try:
        deadline = time.monotonic() + 120
        url = None
        while url is None:
            try:
                seen.append(lines.get(timeout=0.5))
            except queue.Empty:
                if process.poll() is not None or time.monotonic() > deadline:
                    raise RuntimeError(f"trimtab explore printed no address: {seen}") from None
                continue
            found = re.search(r"(http://\S+\?token=[\w-]+)", seen[-1])
            url = found.group(1) if found else None
        while True:
            try:
                urllib.request.urlopen(url, timeout=2).read()
                break
            except OSError:
                if process.poll() is not None or time.monotonic() > deadline:
                    raise RuntimeError("trimtab explore did not start (its stderr follows below)") from None
                time.sleep(0.3)
        process.url = url  # type: ignore[attr-defined]
        process.token = url.rsplit("token=", 1)[1]  # type: ignore[attr-defined]
        yield process
    finally:
        if process.poll() is None:
            process.send_signal(signal.SIGINT)
        try:
            process.wait(timeout=30)
        except subprocess.TimeoutExpired:
            process.kill()
            process.wait()
        assert process.stderr is not None
        err = process.stderr.read()
        process.stderr.close()
        reader.join(timeout=10)  # it ends at the end of stdout
        assert process.stdout is not None
        process.stdout.close()
        out = "".join(seen)
        while not lines.empty():
            out += lines.get()
        process.output = (out, err)  # type: ignore[attr-defined]  # (stdout, stderr), for the test to read


@contextmanager
def chromium(width: int = 1400, height: int = 1800) -> Iterator[Any]:
    """A headless Chromium through the distribution's chromedriver, with a fresh profile."""
    from selenium import webdriver
    from selenium.webdriver.chrome.service import Service

    profile = tempfile.mkdtemp(prefix="trimtab-chromium-")
    options = webdriver.ChromeOptions()
    options.binary_location = CHROMIUM  # type: ignore[assignment]
    for flag in (*FLAGS, f"--user-data-dir={profile}", f"--window-size={width},{height}"):
        options.add_argument(flag)
    driver = webdriver.Chrome(options=options, service=Service(executable_path=CHROMEDRIVER))
    try:
        yield driver
    finally:
        driver.quit()
        shutil.rmtree(profile, ignore_errors=True)


def set_value(driver: Any, element_id: str, value: str) -> None:
    """Type a value into a number input and leave it (a user's Tab), which commits it."""
    from selenium.webdriver.common.by import By
    from selenium.webdriver.common.keys import Keys

    box = driver.find_element(By.ID, element_id)
    driver.execute_script("arguments[0].scrollIntoView({block: 'center'});", box)
    box.send_keys(Keys.CONTROL, "a")
    box.send_keys(value, Keys.TAB)  # leaving the field commits it: one change event


def wait_for_variant(driver: Any, number: int, timeout: float = 60) -> None:
    """Until the page shows variant ``number`` (the trail has that many rows)."""
    from selenium.webdriver.common.by import By
    from selenium.webdriver.support.ui import WebDriverWait

    WebDriverWait(driver, timeout).until(
        lambda d: len(d.find_elements(By.CSS_SELECTOR, "table.trail tbody tr")) >= number
        and d.find_element(By.ID, "status").text.startswith(f"Variant {number}:")
    )


os.environ.setdefault("SE_OFFLINE", "true")  # selenium must never download a driver or a browser
