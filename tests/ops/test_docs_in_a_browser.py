"""The interactive documentation works in a real browser with no network beyond loopback.

Debian's headless Chromium loads ``/schema`` from a started service and the test reads the
page as the browser built it (``--dump-dom``, after the page's scripts ran): every operation of
the OpenAPI document must be listed. The network is made unreachable for the browser: every
host name but 127.0.0.1 resolves to nothing (``--host-resolver-rules``) and every request that
is not to loopback goes to a proxy on a closed local port, so a script or style from a CDN
would fail to load and leave the page blank, as it did before the page's files were served by
the service itself.

``.ci/run`` installs the ``chromium`` package with apt-get. Where it is missing the test skips
and says so, except under CI (``CI`` set), where a missing browser is a failure: there the
install step must have worked.
"""

from __future__ import annotations

import os
import re
import shutil
import subprocess

import httpx
import pytest

from service.launch import LocalService, free_port

CHROMIUM_NAMES = ("chromium", "chromium-browser")


def _chromium() -> str:
    for name in CHROMIUM_NAMES:
        found = shutil.which(name)
        if found:
            return found
    message = (
        "Debian's chromium is not installed (.ci/run installs it: apt-get install chromium); "
        "the docs page cannot be checked in a browser here"
    )
    if os.environ.get("CI"):
        pytest.fail(message)
    pytest.skip(message)


def _browse(url: str, profile, *extra: str) -> str:
    """The DOM of ``url`` once its scripts ran, with no network but loopback."""
    closed_port = free_port()  # nothing listens there: every proxied request fails
    command = [
        _chromium(),
        "--headless", "--no-sandbox", "--disable-gpu", "--no-first-run",
        "--disable-background-networking", "--disable-component-update", "--disable-sync",
        "--disable-dev-shm-usage", "--disable-extensions", "--mute-audio",
        f"--user-data-dir={profile}",
        f"--proxy-server=http://127.0.0.1:{closed_port}",
        "--host-resolver-rules=MAP * ~NOTFOUND , EXCLUDE 127.0.0.1",
        "--virtual-time-budget=20000",
        *extra,
        url,
    ]
    done = subprocess.run(command, capture_output=True, text=True, timeout=120)
    assert done.returncode == 0, done.stderr[-2000:]
    return done.stdout


@pytest.fixture(scope="module")
def service(tmp_path_factory):
    with LocalService(log_path=tmp_path_factory.mktemp("docs") / "service.log") as running:
        yield running


def test_the_docs_page_lists_every_operation_offline(service, tmp_path):
    document = httpx.get(f"{service.url}/schema/openapi.json", timeout=30).json()
    dom = _browse(f"{service.url}/schema", tmp_path / "profile", "--dump-dom")
    assert "SwaggerUIBundle is not defined" not in dom
    listed = set(re.findall(r'class="opblock-summary-path" data-path="([^"]+)"', dom))
    assert listed == set(document["paths"]), (set(document["paths"]) ^ listed)
    for path, item in document["paths"].items():
        for operation in item.values():
            if isinstance(operation, dict) and operation.get("summary"):
                assert operation["summary"].replace("&", "&amp;") in dom, (path, operation)


def test_the_same_browser_cannot_reach_anything_else(tmp_path):
    # the check of the check: with the same flags a page off this machine does not load
    dom = _browse("https://cdn.jsdelivr.net/npm/swagger-ui-dist/", tmp_path / "profile",
                  "--dump-dom")
    assert "swagger-ui-bundle.js" not in dom
