"""Headless Chromium: HTML sheets to PDF and PNG, and layout measurements from the DOM.

Chromium is an optional program (Debian's ``chromium`` package); nothing else in the planner
needs it. Every call runs it with no network, no first-run work and a fresh profile, and waits
for it with a time limit. Its profile and its temporary files go into a scratch folder of the
planner's (``planner-*`` in the temporary folder), and it runs in a process group of its own.
However the call ends (done, time limit, an error, or Ctrl-C or SIGTERM, which the command
line turns into an exception), the group is killed and the scratch folder removed.

The PDFs are the same bytes for the same sheets: Chromium stamps the time of printing into
the document information (``/CreationDate``, ``/ModDate``), which :func:`html_to_pdf`
replaces with the sheets' date, and names structure elements after DOM nodes, which it
renumbers by rank (:func:`fixed_pdf_node_ids`).
"""

from __future__ import annotations

import datetime
import json
import os
import re
import shutil
import signal
import subprocess
import tempfile
import time
from collections.abc import Iterator, Mapping
from contextlib import contextmanager, suppress
from pathlib import Path

from planner.errors import OutputError

__all__ = [
    "PRINTABLE_WIDTH_PX",
    "chromium_path",
    "fixed_pdf_dates",
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


@contextmanager
def _scratch(kind: str) -> Iterator[Path]:
    """A private temporary folder ``planner-<kind>-*``, removed on the way out, however left."""
    folder = Path(tempfile.mkdtemp(prefix=f"planner-{kind}-"))
    try:
        yield folder
    finally:
        # Chromium's killed helpers may still be letting go of files in its profile for a
        # moment after the group is killed, so the removal is retried for up to a second.
        for _ in range(50):
            shutil.rmtree(folder, ignore_errors=True)
            if not os.path.lexists(folder):
                break
            time.sleep(0.02)


def _end(process: subprocess.Popen[str]) -> None:
    """Kill Chromium's whole process group (its renderers and helpers too) and reap it.

    SIGINT and SIGTERM wait until this is done (blocked, then delivered), so a stop that comes
    now cannot leave the group running.
    """
    blocking = hasattr(signal, "pthread_sigmask")
    if blocking:
        before = signal.pthread_sigmask(signal.SIG_BLOCK, {signal.SIGINT, signal.SIGTERM})
    try:
        if hasattr(os, "killpg"):
            with suppress(ProcessLookupError, PermissionError):  # the group is already gone
                os.killpg(process.pid, signal.SIGKILL)
        else:  # Windows has no process groups
            process.kill()
        for stream in (process.stdout, process.stderr):
            if stream is not None:
                stream.close()
        with suppress(subprocess.TimeoutExpired):
            process.wait(timeout=10)
    finally:
        if blocking:
            signal.pthread_sigmask(signal.SIG_SETMASK, before)


def _run(arguments: list[str], scratch: Path) -> subprocess.CompletedProcess[str]:
    """Run Chromium with its profile, temporary files and home folder inside ``scratch``, a
    folder of :func:`_scratch`, so that removing it removes all Chromium wrote, even when it
    was killed."""
    executable = chromium_path()
    if executable is None:
        raise OutputError("Chromium is needed for PDF output and was not found", hint=_HOW_TO_GET)
    command = [executable, *_FLAGS, f"--user-data-dir={scratch / 'profile'}", *arguments]
    home = scratch / "home"
    (scratch / "tmp").mkdir(exist_ok=True)
    home.mkdir(exist_ok=True)
    # Chromium's crash-report database and desktop settings cache would otherwise go into the
    # user's home folder (~/.config/chromium, ~/.cache): the planner writes only where told.
    env = {
        **os.environ,
        "TMPDIR": str(scratch / "tmp"),
        "HOME": str(home),
        "XDG_CONFIG_HOME": str(home / ".config"),
        "XDG_CACHE_HOME": str(home / ".cache"),
    }
    # A session of its own: a signal to the planner's terminal group does not reach Chromium,
    # and _end kills every process Chromium started, whatever ends the call.
    process = subprocess.Popen(
        command,
        env=env,
        stdin=subprocess.DEVNULL,
        stdout=subprocess.PIPE,
        stderr=subprocess.PIPE,
        text=True,
        start_new_session=True,
    )
    try:
        stdout, stderr = process.communicate(timeout=_TIMEOUT_S)
    except subprocess.TimeoutExpired:
        raise OutputError(
            f"Chromium did not finish within {_TIMEOUT_S} s", hint="run again, or print the HTML"
        ) from None
    finally:
        _end(process)
    return subprocess.CompletedProcess(command, process.returncode, stdout, stderr)


#: The date stamped into a PDF when the sheets' date is not a calendar date (YYYY-MM-DD).
_PDF_EPOCH = "19700101"
_PDF_DATES = re.compile(rb"/(?:CreationDate|ModDate)\s*\((D:[^()\\]*)\)")


def _pdf_day(date: str | None) -> str:
    """The sheets' date as YYYYMMDD, or the Unix epoch's day when it is not a calendar date."""
    if date is not None and re.fullmatch(r"\d{4}-\d{2}-\d{2}", date):
        try:
            return datetime.date.fromisoformat(date).strftime("%Y%m%d")
        except ValueError:
            pass
    return _PDF_EPOCH


def fixed_pdf_dates(pdf: bytes, date: str | None = None) -> bytes:
    """A PDF with its creation and modification dates set to ``date`` at 00:00 UTC.

    Each date string is replaced in place by one no longer than it, padded with spaces after
    the closing parenthesis (white space between PDF tokens, PDF 1.7, ISO 32000-1:2008,
    7.2.2), so every byte offset in the cross-reference table stays right. Dates follow the
    PDF date format ``D:YYYYMMDDHHmmSSOHH'mm'`` (ISO 32000-1:2008, 7.9.4).

    Parameters
    ----------
    pdf
        The document as Chromium wrote it.
    date
        ``YYYY-MM-DD``; anything else (or None) stamps 1970-01-01.
    """
    day = _pdf_day(date)
    forms = [f"D:{day}000000+00'00'", f"D:{day}000000Z", f"D:{day}", f"D:{day[:4]}"]

    def fix(match: re.Match[bytes]) -> bytes:
        old = match.group(1)
        for form in forms:
            new = form.encode("ascii")
            if len(new) <= len(old):
                head = match.group(0)[: match.start(1) - match.start(0)]
                return head + new + b")" + b" " * (len(old) - len(new))
        return match.group(0)

    return _PDF_DATES.sub(fix, pdf)


_PDF_NODE_IDS = re.compile(rb"\(node(\d+)\)")


def fixed_pdf_node_ids(pdf: bytes) -> bytes:
    """A PDF whose structure elements' ids are numbered by rank instead of by DOM node.

    Chromium names each element of a tagged PDF's structure tree ``(nodeNNNNNNNN)`` after the
    DOM node it came from, and the DOM numbers its nodes in the order they were made, which
    varies from run to run (an image that loads sooner). The same ids appear in the element
    and in the tree's id index, whose keys are sorted (a name tree, ISO 32000-1:2008, 7.9.6,
    and 14.7.2 for ``/IDTree``). Renumbering each id by its rank among the document's ids
    keeps that order and every id's digit count, hence every byte offset; two prints of the
    same sheets then give the same bytes.
    """
    numbers = sorted({int(m.group(1)) for m in _PDF_NODE_IDS.finditer(pdf)})
    rank = {number: position for position, number in enumerate(numbers, start=1)}

    def renumber(match: re.Match[bytes]) -> bytes:
        digits = match.group(1)
        new = str(rank[int(digits)]).zfill(len(digits)).encode("ascii")
        # A rank is at most its id plus one; an id that would grow keeps its own number.
        return b"(node" + new + b")" if len(new) == len(digits) else match.group(0)

    return _PDF_NODE_IDS.sub(renumber, pdf)


def html_to_pdf(html: Path, pdf: Path, *, date: str | None = None) -> None:
    """Print an HTML file to PDF with its own @page rules, no browser header or footer.

    The PDF's creation and modification dates are ``date`` (``YYYY-MM-DD``) at 00:00 UTC, or
    1970-01-01 without one, so the same page always prints to the same bytes.
    """
    with _scratch("chromium") as scratch:
        done = _run(
            [f"--print-to-pdf={pdf}", "--no-pdf-header-footer", html.resolve().as_uri()],
            scratch,
        )
    if not pdf.exists() or pdf.stat().st_size == 0:
        raise OutputError(
            f"Chromium made no PDF of {html.name}", hint=done.stderr.strip()[-300:] or _HOW_TO_GET
        )
    pdf.write_bytes(fixed_pdf_node_ids(fixed_pdf_dates(pdf.read_bytes(), date)))


def html_to_png(html: Path, png: Path, *, width_px: int = 900, height_px: int = 1270) -> None:
    """Screenshot an HTML file (screen media) to PNG."""
    with _scratch("chromium") as scratch:
        _run(
            [
                f"--screenshot={png}",
                f"--window-size={width_px},{height_px}",
                html.resolve().as_uri(),
            ],
            scratch,
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
    with _scratch("layout") as folder:
        if assets:
            _write_assets(folder, assets)
        page = folder / "page.html"
        page.write_text(probed, encoding="utf-8")
        done = _run(
            [
                f"--window-size={width_px},1000",
                "--virtual-time-budget=5000",
                "--dump-dom",
                page.as_uri(),
            ],
            folder,
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


def pdfs_for(files: Mapping[str, str | bytes], *, date: str | None = None) -> dict[str, bytes]:
    """PDF twins of the top-level ``.html`` files of an output folder, keyed ``name.pdf``.

    Sheets in sub-folders (one per bench) are left out: ``bench-sheets.pdf`` already holds
    every bench, one per page. The whole folder is laid out in a private temporary folder
    (so the plots the answer key shows from ``plots/`` are there), and nothing half-made
    reaches the output folder, which is written afterwards in one atomic step. The PDFs'
    dates are ``date`` (the sheets' date, see :func:`html_to_pdf`).
    """
    result: dict[str, bytes] = {}
    with _scratch("pdf") as folder:
        _write_assets(folder, files)
        for name, text in files.items():
            if not name.endswith(".html") or "/" in name or not isinstance(text, str):
                continue
            html = folder / name
            pdf = html.with_suffix(".pdf")
            html_to_pdf(html, pdf, date=date)
            result[name.removesuffix(".html") + ".pdf"] = pdf.read_bytes()
    return result
