"""Drive Debian's Chromium headless with networking off: screenshots and a scripted probe.

``.ci/run`` installs Chromium where it is missing, so in CI (``CI`` set) a missing
browser fails the tests that need it instead of skipping them.
"""

from __future__ import annotations

import json
import os
import re
import shutil
import subprocess
from pathlib import Path

import pytest

#: Flags for a headless run as root with no network and a throwaway profile.
FLAGS = ("--headless", "--no-sandbox", "--disable-gpu", "--no-first-run",
         "--disable-background-networking", "--disable-component-update", "--disable-sync",
         "--disable-extensions", "--proxy-server=http://127.0.0.1:9",
         "--host-resolver-rules=MAP * ~NOTFOUND")

PROBE_ID = "gisrun-probe-result"


def browser() -> str:
    """Path of the Chromium binary; skip (fail in CI) when there is none."""
    found = next((b for b in ("/usr/bin/chromium", shutil.which("chromium") or "",
                              shutil.which("chromium-browser") or "")
                  if b and Path(b).exists()), None)
    if found is None:
        if os.environ.get("CI"):
            pytest.fail("no chromium binary in CI: .ci/run should have installed it")
        pytest.skip("no chromium binary (.ci/run installs Debian's chromium)")
    return found


def run_chromium(args: list[str], work: Path, *, width: int, height: int = 1000) -> str:
    """Run headless Chromium with a fresh profile in ``work``; return its stdout."""
    done = subprocess.run([browser(), *FLAGS, f"--user-data-dir={work / 'profile'}",
                           f"--window-size={width},{height}", *args],
                          check=True, timeout=180, capture_output=True, text=True)
    return done.stdout


def screenshot(page: Path, shot: Path, *, width: int = 1300, height: int = 1000) -> Path:
    """A PNG screenshot of ``page`` at the given window size."""
    run_chromium([f"--screenshot={shot}", "--virtual-time-budget=5000", page.as_uri()],
                 shot.parent, width=width, height=height)
    return shot


def probe(page: Path, script: str, work: Path, *, width: int = 1300) -> dict:
    """Load a copy of ``page`` with ``script`` added at the end of its body, and return the
    JSON object the script stores with ``window.gisrunProbe(obj)`` (read back with
    ``--dump-dom``). Content-security-policy violations are recorded under ``violations``."""
    text = page.read_text(encoding="utf-8")
    head = ("<script>window.__violations=[];document.addEventListener("
            "'securitypolicyviolation',function(e){window.__violations.push(e.blockedURI+' '+"
            "e.violatedDirective);});window.gisrunProbe=function(o){o.violations="
            "window.__violations;var pre=document.createElement('pre');pre.id='" + PROBE_ID +
            "';pre.textContent=JSON.stringify(o);document.body.appendChild(pre);};</script>")
    text = text.replace("<style>", head + "<style>", 1)
    text = text.replace("</body>", f"<script>{script}</script></body>", 1)
    copy = work / "probe.html"
    copy.write_text(text, encoding="utf-8")
    dom = run_chromium(["--dump-dom", "--virtual-time-budget=10000", copy.as_uri()], work,
                       width=width)
    found = re.search(rf'<pre id="{PROBE_ID}">(.*?)</pre>', dom, re.S)
    assert found, "the probe script did not report (did the page's script fail?)"
    raw = found.group(1).replace("&lt;", "<").replace("&gt;", ">").replace("&quot;", '"')
    return json.loads(raw.replace("&amp;", "&"))
