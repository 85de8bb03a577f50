"""Headless Chromium: HTML sheets to PDF and PNG, and layout measurements from the DOM.

Chromium is an optional program (Debian's ``chromium`` package); nothing else in the planner
needs it. Every call runs it with no network, no first-run work and a fresh profile, and waits
for it with a time limit.
"""

from __future__ import annotations

import json
import re
import shutil
import subprocess
import tempfile
from collections.abc import Mapping
from pathlib import Path

from planner.errors import OutputError

__all__ = [
    "PRINTABLE_WIDTH_PX",
    "chromium_path",
    "html_to_pdf",
    "html_to_png",
    "measure_layout",
    "pdf_page_count",
    "pdfs_for",
]

#: Width of the printable area of an A4 page with the sheets' 12 mm side margins, in CSS
#: pixels (96 per inch): (210 - 2 x 12) mm / 25.4 x 96 = 703 px. US Letter (215.9 mm) is wider.
PRINTABLE_WIDTH_PX = 703
_CANDIDATES = ("chromium", "chromium-browser", "google-chrome", "chrome")
_FLAGS = (
    "--headless",
    "--no-sandbox",
    "--disable-gpu",
    "--disable-quic",
    "--no-first-run",
    "--disable-background-networking",
    "--disable-component-update",
    "--disable-sync",
    "--disable-extensions",
    "--hide-scrollbars",
)
_TIMEOUT_S = 60
_HOW_TO_GET = (
    "install Chromium (on Debian or Ubuntu: sudo apt-get install chromium) and run again; "
    "the HTML sheets print from any browser meanwhile"
)


def chromium_path() -> str | None:
    """The Chromium executable on PATH, or None."""
    for name in _CANDIDATES:
        found = shutil.which(name)
        if found:
            return found
    return None


def _run(arguments: list[str], profile: Path) -> subprocess.CompletedProcess[str]:
    executable = chromium_path()
    if executable is None:
        raise OutputError("Chromium is needed for PDF output and was not found", hint=_HOW_TO_GET)
    command = [executable, *_FLAGS, f"--user-data-dir={profile}", *arguments]
    try:
        return subprocess.run(
            command, capture_output=True, text=True, timeout=_TIMEOUT_S, check=False
        )
    except subprocess.TimeoutExpired:
        raise OutputError(
            f"Chromium did not finish within {_TIMEOUT_S} s", hint="run again, or print the HTML"
        ) from None


def html_to_pdf(html: Path, pdf: Path) -> None:
    """Print an HTML file to PDF with its own @page rules, no browser header or footer."""
    with tempfile.TemporaryDirectory() as profile:
        done = _run(
            [f"--print-to-pdf={pdf}", "--no-pdf-header-footer", html.resolve().as_uri()],
            Path(profile),
        )
    if not pdf.exists() or pdf.stat().st_size == 0:
        raise OutputError(
            f"Chromium made no PDF of {html.name}", hint=done.stderr.strip()[-300:] or _HOW_TO_GET
        )


def html_to_png(html: Path, png: Path, *, width_px: int = 900, height_px: int = 1270) -> None:
    """Screenshot an HTML file (screen media) to PNG."""
    with tempfile.TemporaryDirectory() as profile:
        _run(
            [
                f"--screenshot={png}",
                f"--window-size={width_px},{height_px}",
                html.resolve().as_uri(),
            ],
            Path(profile),
        )
    if not png.exists():
        raise OutputError(f"Chromium made no screenshot of {html.name}", hint=_HOW_TO_GET)


_PROBE = """
<script>
window.addEventListener('load', function () {
  var width = document.documentElement.clientWidth;
  var tables = Array.prototype.map.call(document.querySelectorAll('table'), function (t) {
    var box = t.getBoundingClientRect();
    return {right: box.right, scroll: t.scrollWidth, client: t.clientWidth};
  });
  var images = Array.prototype.map.call(document.querySelectorAll('img'), function (i) {
    var box = i.getBoundingClientRect();
    return {src: i.getAttribute('src'), right: box.right, width: box.width,
      natural: i.naturalWidth, loaded: i.complete && i.naturalWidth > 0};
  });
  var text = document.body.innerText;
  var out = document.createElement('pre');
  out.id = 'layout-probe';
  out.textContent = JSON.stringify({width: width, tables: tables, images: images, text: text,
    pages: document.querySelectorAll('.page').length});
  document.body.appendChild(out);
});
</script>
"""


def _write_assets(folder: Path, assets: Mapping[str, str | bytes]) -> None:
    """Files a page refers to by relative path (``plots/ladder.svg``), written under folder."""
    for name, content in assets.items():
        parts = name.split("/")
        if not name or name.startswith("/") or "\\" in name or ".." in parts:
            raise OutputError(
                "a file beside a page must have a relative name inside its folder",
                field="assets",
                value=name,
                hint="use names such as 'plots/ladder.svg'",
            )
        path = folder.joinpath(*parts)
        path.parent.mkdir(parents=True, exist_ok=True)
        if isinstance(content, str):
            path.write_text(content, encoding="utf-8")
        else:
            path.write_bytes(content)


def measure_layout(
    html_text: str,
    *,
    width_px: int = PRINTABLE_WIDTH_PX,
    assets: Mapping[str, str | bytes] | None = None,
) -> dict[str, object]:
    """Lay a page out at the printable width and report where its tables and images end.

    Parameters
    ----------
    html_text
        The page.
    width_px
        Viewport width [CSS px].
    assets
        Files the page refers to by relative path (such as ``plots/ladder.svg``), by
        ``/``-separated name; written beside the page so images load.

    Returns
    -------
    dict
        ``width`` (viewport width [px]), ``tables`` (each table's right edge, scroll and client
        widths [px]), ``images`` (each image's ``src``, right edge and width [px], natural
        width [px] and whether it ``loaded``), ``text`` (the visible text) and ``pages``
        (number of ``.page`` blocks).
    """
    probed = html_text.replace("</body>", _PROBE + "</body>")
    with tempfile.TemporaryDirectory() as folder:
        if assets:
            _write_assets(Path(folder), assets)
        page = Path(folder) / "page.html"
        page.write_text(probed, encoding="utf-8")
        done = _run(
            [
                f"--window-size={width_px},1000",
                "--virtual-time-budget=5000",
                "--dump-dom",
                page.as_uri(),
            ],
            Path(folder) / "profile",
        )
    found = re.search(r'<pre id="layout-probe">(.*?)</pre>', done.stdout, re.DOTALL)
    if not found:
        raise OutputError("Chromium did not lay the page out", hint=done.stderr.strip()[-300:])
    text = (
        found.group(1).replace("&lt;", "<").replace("&gt;", ">").replace("&quot;", '"')
    ).replace("&amp;", "&")
    result: dict[str, object] = json.loads(text)
    return result


def pdf_page_count(pdf: bytes) -> int:
    """Pages of a PDF as Chromium writes it (page objects are not compressed there)."""
    return len(re.findall(rb"/Type\s*/Page(?![a-zA-Z])", pdf))


def pdfs_for(files: Mapping[str, str | bytes]) -> dict[str, bytes]:
    """PDF twins of the top-level ``.html`` files of an output folder, keyed ``name.pdf``.

    Sheets in sub-folders (one per bench) are left out: ``bench-sheets.pdf`` already holds
    every bench, one per page. The whole folder is laid out in a private temporary folder
    (so the plots the answer key shows from ``plots/`` are there), and nothing half-made
    reaches the output folder, which is written afterwards in one atomic step.
    """
    result: dict[str, bytes] = {}
    with tempfile.TemporaryDirectory() as folder:
        _write_assets(Path(folder), files)
        for name, text in files.items():
            if not name.endswith(".html") or "/" in name or not isinstance(text, str):
                continue
            html = Path(folder) / name
            pdf = html.with_suffix(".pdf")
            html_to_pdf(html, pdf)
            result[name.removesuffix(".html") + ".pdf"] = pdf.read_bytes()
    return result
