"""Regenerate the README images in docs/images/ from the invented demo.

    python docs/make_images.py

Runs the demo into a temporary folder, copies three of its PNGs and takes a
screenshot of the report's interactive map (a subcatchment clicked and hovered)
with Debian's Chromium, headless and with networking off.
"""

from __future__ import annotations

import shutil
import subprocess
import tempfile
from pathlib import Path

from gisrun import load_project, run_and_write, write_extras

ROOT = Path(__file__).resolve().parents[1]
IMAGES = ROOT / "docs" / "images"
STORM = "nrcs_ii_24h_10yr_90mm"
COPIES = {f"runoff_depth_{STORM}.png": "demo_runoff_depth_map.png",
          f"cell_runoff_depth_{STORM}.png": "demo_cell_runoff_depth.png",
          "infiltration_observed_event_kv_055.png": "demo_infiltration_plot.png",
          "rain_depth_gauged_event.png": "demo_rain_depth_map.png"}
CHROMIUM = ("/usr/bin/chromium", "--headless", "--no-sandbox", "--disable-gpu", "--no-first-run",
            "--disable-background-networking", "--disable-component-update", "--disable-sync",
            "--proxy-server=http://127.0.0.1:9", "--host-resolver-rules=MAP * ~NOTFOUND")
# show only the interactive map, choose the 10-year storm, open and hover one subcatchment
SHOW_MAP = ("<style>section:not(#explore),nav{display:none}</style><script>"
            "window.addEventListener('load',function(){var p=document.querySelector("
            "'#explore-svg path.sc[data-k=\"54\"]');var s=document.getElementById('explore-storm');"
            "s.value='1';s.dispatchEvent(new Event('change'));p.dispatchEvent(new MouseEvent("
            "'click',{bubbles:true}));var r=p.getBoundingClientRect();p.dispatchEvent(new "
            "MouseEvent('mouseover',{bubbles:true,clientX:r.left+r.width/2,clientY:r.top+"
            "r.height/2}));});</script></body>")


def main() -> None:
    """Run the demo and write the README images."""
    with tempfile.TemporaryDirectory() as tmp:
        work = Path(tmp)
        shutil.copytree(ROOT / "demo_catchment", work / "demo")
        project = load_project(work / "demo" / "gisrun.toml")
        result, gpkg = run_and_write(project, output=work / "out" / "demo_runoff.gpkg")
        made = write_extras(result, gpkg)
        for source, target in COPIES.items():
            shutil.copyfile(made.maps[Path(source).stem], IMAGES / target)
        page = work / "report_map.html"
        page.write_text(made.report.read_text(encoding="utf-8").replace("</body>", SHOW_MAP, 1),
                        encoding="utf-8")
        subprocess.run([*CHROMIUM, f"--user-data-dir={work / 'profile'}",
                        "--window-size=1300,900", "--virtual-time-budget=5000",
                        f"--screenshot={IMAGES / 'demo_report.png'}", page.as_uri()],
                       check=True, capture_output=True, timeout=180)
    print(f"wrote {', '.join(sorted([*COPIES.values(), 'demo_report.png']))} in {IMAGES}")


if __name__ == "__main__":
    main()
