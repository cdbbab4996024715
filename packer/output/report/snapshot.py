"""PNG pictures of a written plan's drawings, made by headless Chromium (the README's pictures).

    python -m packer.output.report.snapshot out/brindle-lane-day .readme

writes ``plate.png`` (the first plate with a keep-out zone, else the first
plate) and ``timeline.png`` from ``views/*.svg`` of the output folder. Needs
the ``chromium`` executable (Debian package ``chromium``).
"""

from __future__ import annotations

import re
import shutil
import subprocess
import sys
import tempfile
from pathlib import Path

__all__ = ["snapshot", "main"]

FLAGS = ["--headless", "--no-sandbox", "--disable-gpu", "--disable-quic", "--no-first-run",
         "--disable-background-networking", "--disable-component-update", "--disable-sync", "--hide-scrollbars"]


def _size(svg: str) -> tuple[int, int]:
    head = svg[:svg.index(">")]
    w = re.search(r'\swidth="(\d+)', head)
    h = re.search(r'\sheight="(\d+)', head)
    return int(w.group(1)), int(h.group(1))


def snapshot(svg_path: Path, png_path: Path, *, chromium: str = "chromium", scale: int = 2) -> Path:
    """Render one SVG file to PNG at ``scale`` device pixels per CSS pixel."""
    svg = Path(svg_path).read_text(encoding="utf-8")
    w, h = _size(svg)
    with tempfile.TemporaryDirectory(prefix="packer-snap-") as tmp:
        page = Path(tmp) / "page.html"
        page.write_text(f"<!doctype html><html><body style='margin:0;background:#fff'>{svg}</body></html>",
                        encoding="utf-8")
        run = subprocess.run([chromium, *FLAGS, f"--user-data-dir={tmp}/profile", f"--window-size={w},{h}",
                              f"--force-device-scale-factor={scale}", f"--screenshot={Path(png_path).resolve()}",
                              page.as_uri()], capture_output=True, text=True, timeout=120)
        if run.returncode != 0 or not Path(png_path).is_file():
            raise RuntimeError(f"chromium could not render {svg_path}: {run.stderr.strip()[-400:]}")
    return Path(png_path)


def main(argv: list[str] | None = None) -> int:
    argv = sys.argv[1:] if argv is None else argv
    if len(argv) != 2:
        print(__doc__.strip(), file=sys.stderr)
        return 2
    outdir, dest = Path(argv[0]), Path(argv[1])
    chromium = shutil.which("chromium") or shutil.which("chromium-browser")
    if chromium is None:
        print("packer.output.report.snapshot: chromium not found (apt-get install chromium)", file=sys.stderr)
        return 1
    views = sorted((outdir / "views").glob("P*.svg"))
    if not views:
        print(f"packer.output.report.snapshot: no plate drawings in {outdir / 'views'} (run packer plan first)",
              file=sys.stderr)
        return 1
    plate = next((v for v in views if "keep-out zone" in v.read_text(encoding="utf-8")), views[0])
    dest.mkdir(parents=True, exist_ok=True)
    for src, name in ((plate, "plate.png"), (outdir / "views" / "timeline.svg", "timeline.png")):
        print(snapshot(src, dest / name, chromium=chromium))
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
