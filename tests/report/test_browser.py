"""Printed sheets in a real browser (headless Chromium): layout, content and page count.

Chromium is installed by .ci/run (Debian's ``chromium`` package); these tests fail, not skip,
when it is missing, because printing is part of the job.
"""

from __future__ import annotations

import os
import re
import signal
import subprocess
import sys
import time
from contextlib import suppress
from pathlib import Path

import numpy as np
import pytest
from typer.testing import CliRunner

from planner.cli import app
from planner.pipeline import combined_plan, design_variants
from planner.planfile import load_plan
from planner.report.browser import (
    PRINTABLE_WIDTH_PX,
    chromium_path,
    fixed_pdf_dates,
    html_to_pdf,
    html_to_png,
    measure_layout,
    pdf_page_count,
)
from planner.report.outdir import plan_files
from planner.report.variants_index import variants_files
from tests.plans import plan_of

ROOT = Path(__file__).resolve().parents[2]
# Few benches (1 section x 4 benches) keep the browser work short.
RECIPE = ROOT / "recipes" / "copper-ligand-excess.toml"


@pytest.fixture(scope="module")
def files():
    assert chromium_path() is not None, "Chromium is required: apt-get install chromium"
    plan = plan_of(RECIPE)
    return plan, plan_files(plan, date="2026-12-02", plots=True)


SHEETS = ("bench-sheets.html", "prep-sheet.html", "answer-key.html")
PDF_NAMES = ("bench-sheets.pdf", "prep-sheet.pdf", "answer-key.pdf")


@pytest.fixture(scope="module")
def layouts(files):
    """Each sheet's layout in Chromium, measured once for every test that reads it."""
    _, contents = files
    return {name: measure_layout(contents[name], assets=_plots(contents)) for name in SHEETS}


@pytest.fixture(scope="module")
def printed(tmp_path_factory):
    """The PDFs of two runs of ``planner plan --pdf`` on the recipe (same inputs), by name.

    The runs take several seconds each, so the clock has moved on between them.
    """
    runs = []
    for folder in ("sheets", "again"):
        out = tmp_path_factory.mktemp(folder) / "out"
        result = CliRunner().invoke(
            app, ["plan", str(RECIPE), "--out", str(out), "--pdf", "--date", "2026-12-02"]
        )
        assert result.exit_code == 0, result.stderr
        runs.append({name: (out / name).read_bytes() for name in PDF_NAMES})
    return runs


def _plots(contents):
    return {name: data for name, data in contents.items() if name.startswith("plots/")}


def _assert_fits(layout):
    width = layout["width"]
    assert width == PRINTABLE_WIDTH_PX
    for table in layout["tables"]:
        # No table runs past the printable width, and none needs a scroll bar inside.
        assert table["right"] <= width + 0.5
        assert table["scroll"] <= table["client"] + 1
    for image in layout["images"]:
        # Every image loads and stays inside the printable width.
        assert image["loaded"], image["src"]
        assert image["right"] <= width + 0.5, image["src"]


@pytest.mark.parametrize("name", SHEETS)
def test_sheet_fits_printable_width_and_names_every_mixture(files, layouts, name):
    plan, _ = files
    layout = layouts[name]
    _assert_fits(layout)
    text = layout["text"]
    if name != "prep-sheet.html":
        for mixture in plan.mixtures:
            assert mixture.id in text
    assert "safety data sheets" in text


def test_bench_sheets_pdf_has_one_page_per_bench(files, printed, tmp_path):
    # The PDF is the one `planner plan --pdf` printed of the same sheets (html_to_pdf).
    plan, contents = files
    html = tmp_path / "bench-sheets.html"
    html.write_text(contents["bench-sheets.html"])
    benches = plan.inputs.session.sections * plan.inputs.session.benches_per_section
    assert pdf_page_count(printed[0]["bench-sheets.pdf"]) == benches
    png = tmp_path / "bench-sheets.png"
    html_to_png(html, png)
    assert png.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"


def test_answer_key_shows_every_plot_inside_the_printable_width(files, layouts):
    _, contents = files
    svgs = sorted(name for name in contents if name.startswith("plots/") and name.endswith("svg"))
    assert svgs == ["plots/bound-fraction.svg", "plots/coverage.svg", "plots/ladder.svg"]
    layout = layouts["answer-key.html"]
    _assert_fits(layout)
    assert sorted(image["src"] for image in layout["images"]) == svgs
    for image in layout["images"]:
        # Shown at the SVG's own size (6.6 in = 634 px), so its text prints at 9-11 pt.
        assert image["width"] == pytest.approx(6.6 * 96, abs=1)


# An invented zinc-dye bench with three absorbing products (ZnD+, ZnD2, ZnD3): the answer
# key's expected-readings table has a concentration column for each.
THREE_PRODUCTS = """
title = "Zinc with an invented dye D: three absorbing products"
[reaction]
ionic_strength_M = 0.1
components = ["Zn2+", "D-"]
component_epsilon = { "D-" = 150 }
[[reaction.species]]
name = "ZnD+"
formula = { "Zn2+" = 1, "D-" = 1 }
log_beta = 4.2
epsilon = 4200
[[reaction.species]]
name = "ZnD2"
formula = { "Zn2+" = 1, "D-" = 2 }
log_beta = 7.0
epsilon = 6100
[[reaction.species]]
name = "ZnD3"
formula = { "Zn2+" = 1, "D-" = 3 }
log_beta = 9.0
epsilon = 6500
[instrument]
wavelength_nm = 540
absorbance_sd = 0.002
[[stocks]]
id = "zinc"
contains_M = { "Zn2+" = 0.001, "NO3-" = 0.002 }
[[stocks]]
id = "dye"
contains_M = { "D-" = 0.001, "Na+" = 0.001 }
[[stocks]]
id = "buffer"
contains_M = { "Na+" = 0.1, "NO3-" = 0.1 }
diluent = true
[[glassware]]
kind = "buret"
volume_mL = 25
count = 2
[[glassware]]
kind = "volumetric-flask"
volume_mL = 25
count = 12
[design]
limiting = "D-"
measured_species = "ZnD+"
vessel = "flask-25"
"""


def _more_products(count):
    """THREE_PRODUCTS with ZnD4 ... ZnD<count> too (log beta rising by about 1 a step)."""
    extra = "".join(
        f'[[reaction.species]]\nname = "ZnD{n}"\nformula = {{ "Zn2+" = 1, "D-" = {n} }}\n'
        f"log_beta = {9.0 + 0.9 * (n - 3):.1f}\nepsilon = {6500 + 100 * (n - 3)}\n"
        for n in range(4, count + 1)
    )
    return THREE_PRODUCTS.replace("[instrument]", extra + "[instrument]")


@pytest.mark.parametrize("count", [3, 7, 12])
def test_a_table_of_many_products_keeps_to_the_printable_width(count):
    # The expected readings of three products took 826 px of the 703 px printable width
    # while their headings could not wrap; a heading now wraps, and products beyond the
    # fourth go to a table of their own below, so every table of the answer key fits.
    from planner.pipeline import design_plan
    from planner.planfile import parse_plan
    from planner.report.sheets import answer_key_html, answer_key_md

    plan = design_plan(parse_plan(_more_products(count)))
    layout = measure_layout(answer_key_html(plan, date="2026-12-02"), assets={})
    _assert_fits(layout)
    markdown = answer_key_md(plan, date="2026-12-02")
    for n in range(1, count + 1):
        name = "ZnD+" if n == 1 else f"ZnD{n}"
        assert f"[{name}] (mol/L)" in layout["text"]
        assert markdown.count(f"[{name}] (mol/L)") == 1


@pytest.mark.parametrize("name", ["prep-sheet.pdf", "answer-key.pdf"])
def test_other_sheets_print_to_pdf(printed, name):
    # Printed by `planner plan --pdf` (html_to_pdf, with the plots beside the sheets).
    assert pdf_page_count(printed[0][name]) >= 1


def test_variants_index_fits():
    inputs = load_plan(RECIPE)
    found = design_variants(inputs, 2, np.random.default_rng(5))
    contents = variants_files(
        found.plans, combined=combined_plan(found.plans), date="2026-12-02", seed=5
    )
    layout = measure_layout(contents["index.html"])
    _assert_fits(layout)
    assert "section-02/" in layout["text"]


def test_plan_pdf_option_writes_the_same_pdfs_every_run(printed):
    # Issue 9: Chromium stamps the time of printing into every PDF, so two runs differed.
    pdfs = printed
    for name in PDF_NAMES:
        first = pdfs[0][name]
        assert first.startswith(b"%PDF")
        # The dates are the sheets' date at midnight UTC, in the PDF date format
        # (ISO 32000-1:2008, 7.9.4).
        assert b"/CreationDate (D:20261202000000+00'00')" in first
        assert b"/ModDate (D:20261202000000+00'00')" in first
        assert pdfs[1][name] == first, f"{name} differs between two identical runs"


# A small PDF in Chromium's layout (invented): an information dictionary with both dates, in
# the two forms of the PDF date format, and a cross-reference table pointing at each object.
_INFO = (
    b"<</Producer (Skia/PDF m156)\n"
    b"/CreationDate (D:20261203114423+01'00')\n"
    b"/ModDate (D:20261203114424Z)>>"
)


def _tiny_pdf():
    body = b"%PDF-1.4\n1 0 obj\n" + _INFO + b"\nendobj\n2 0 obj\n<</Type /Catalog>>\nendobj\n"
    offsets = [body.index(b"1 0 obj"), body.index(b"2 0 obj")]
    xref = b"xref\n0 3\n0000000000 65535 f \n" + b"".join(
        b"%010d 00000 n \n" % offset for offset in offsets
    )
    trailer = b"trailer\n<</Size 3 /Root 2 0 R /Info 1 0 R>>\nstartxref\n%d\n%%%%EOF\n"
    return body + xref + trailer % len(body), offsets


def test_fixed_pdf_dates_keep_every_byte_offset():
    pdf, offsets = _tiny_pdf()
    fixed = fixed_pdf_dates(pdf, "2026-12-02")
    assert len(fixed) == len(pdf)
    # Each offset of the cross-reference table still points at its object, and the file
    # after the information dictionary is unchanged byte for byte.
    for number, offset in enumerate(offsets, start=1):
        assert fixed[offset:].startswith(b"%d 0 obj" % number)
    tail = pdf.index(b">>") + 2
    assert fixed[tail:] == pdf[tail:]
    assert b"/CreationDate (D:20261202000000+00'00')\n" in fixed
    # The shorter form D:...Z keeps its length and its form.
    assert b"/ModDate (D:20261202000000Z)>>" in fixed
    assert b"/Producer (Skia/PDF m156)" in fixed
    # A date of another length (22 characters, the offset without its closing apostrophe)
    # takes the longest form that fits (17) and 5 spaces after the parenthesis.
    other = b"/ModDate (D:20261203114424-05'00)>>"
    assert fixed_pdf_dates(other, "2026-12-02") == b"/ModDate (D:20261202000000Z)     >>"
    # A date that is not a calendar date stamps the Unix epoch's day instead.
    assert b"/CreationDate (D:19700101000000+00'00')" in fixed_pdf_dates(pdf, "week 3")


def _processes():
    """Running processes, read from /proc: pid -> (process group, command line); zombies
    (finished, waiting for their parent to collect them) are left out."""
    found = {}
    for entry in Path("/proc").iterdir():
        if not entry.name.isdigit():
            continue
        try:
            stat = (entry / "stat").read_text()
            command = (
                (entry / "cmdline").read_bytes().replace(b"\0", b" ").decode("utf-8", "replace")
            )
        except OSError:
            continue
        fields = stat[stat.rindex(")") + 2 :].split()
        if fields[0] != "Z":
            found[int(entry.name)] = (int(fields[2]), command)
    return found


# Attempts at landing the signal while Chromium prints: on a fast machine the print can end
# between the moment Chromium is seen and the signal, and the output folder is then already
# finished (a stop mid-print leaves none), so that attempt tests nothing.
_STOP_ATTEMPTS = 5


@pytest.mark.parametrize("signum", [signal.SIGTERM, signal.SIGINT])
def test_stopping_plan_pdf_ends_chromium_and_removes_temporaries(tmp_path, signum):
    # Issue 9: a SIGTERM or Ctrl-C while printing left Chromium running and a temporary copy
    # of the output behind.
    for attempt in range(_STOP_ATTEMPTS):
        if _stop_while_printing(tmp_path / f"attempt-{attempt}", signum):
            return
    pytest.fail(f"the signal never landed while Chromium printed ({_STOP_ATTEMPTS} attempts)")


def _stop_while_printing(tmp_path, signum) -> bool:
    """Stop `planner plan --pdf` once Chromium runs and check it ended cleanly; False when
    the print had already ended, so the signal came too late to test anything."""
    home, scratch, work = tmp_path / "home", tmp_path / "tmp", tmp_path / "work"
    for folder in (home, scratch, work):
        folder.mkdir(parents=True)
    env = {
        **os.environ,
        "PYTHONPATH": str(ROOT),
        "PYTHONDONTWRITEBYTECODE": "1",
        "HOME": str(home),
        "TMPDIR": str(scratch),
        "XDG_CONFIG_HOME": str(home / ".config"),
        "XDG_CACHE_HOME": str(home / ".cache"),
    }
    # No plots: the signal is sent once Chromium runs, and the figures before it cost seconds.
    command = [
        "plan",
        str(RECIPE),
        "--pdf",
        "--out",
        "sheets",
        "--date",
        "2026-12-02",
        "--no-plots",
    ]
    planner = subprocess.Popen(
        [sys.executable, "-m", "planner", *command],
        cwd=work,
        env=env,
        stdout=subprocess.PIPE,
        stderr=subprocess.PIPE,
        text=True,
        start_new_session=True,
    )
    groups: set[int] = set()
    try:
        deadline = time.monotonic() + 90
        while not groups and planner.poll() is None and time.monotonic() < deadline:
            groups = {
                group
                for group, line in _processes().values()
                if str(scratch) in line and "chrom" in line
            }
            time.sleep(0.05)
        assert groups, "Chromium was never seen running"
        planner.send_signal(signum)
        _, stderr = planner.communicate(timeout=30)
        if (work / "sheets" / "plan.json").exists() or planner.returncode == -signum:
            # Too late: the output folder was finished, or the command had ended and the
            # process died by the default action at exit. A handler that never works fails
            # every attempt.
            return False
        assert planner.returncode == 128 + signum, stderr
        assert signal.Signals(signum).name in stderr
        assert "Traceback" not in stderr
        assert len(stderr.strip().splitlines()) == 1
        # Chromium's process group is gone at once; its crash handler, in a session of its
        # own, leaves by itself when the browser has gone (allowed a few seconds).
        assert not [pid for pid, (group, _) in _processes().items() if group in groups]
        deadline = time.monotonic() + 5
        while True:
            left = {pid: line for pid, (_, line) in _processes().items() if str(tmp_path) in line}
            if not left or time.monotonic() > deadline:
                break
            time.sleep(0.1)
        assert left == {}
        assert sorted(scratch.iterdir()) == []
        assert sorted(work.iterdir()) == []  # no output folder, no staging folder
        return True
    finally:
        if planner.poll() is None:
            planner.kill()
            planner.wait()
        for group in groups:
            with suppress(ProcessLookupError, PermissionError):
                os.killpg(group, signal.SIGKILL)


def test_plan_pdf_without_out_is_refused():
    result = CliRunner().invoke(app, ["plan", str(RECIPE), "--pdf"])
    assert result.exit_code == 2
    assert "--out" in result.stderr


def test_long_bench_sheet_still_one_page_per_bench(tmp_path):
    # The flask recipe has the tallest rows (several devices per addition): each bench's
    # table, order of addition and cautions must still share one printed page.
    plan = plan_of(ROOT / "recipes" / "iron-thiocyanate-flasks.toml")
    contents = plan_files(plan, date="2026-12-02")
    html = tmp_path / "bench-sheets.html"
    html.write_text(contents["bench-sheets.html"])
    pdf = tmp_path / "bench-sheets.pdf"
    html_to_pdf(html, pdf)
    session = plan.inputs.session
    assert pdf_page_count(pdf.read_bytes()) == session.sections * session.benches_per_section


def test_structure_ids_are_renumbered_by_rank_and_keep_every_offset():
    # Chromium names structure elements after DOM nodes, whose numbers vary between runs;
    # two prints that differ only by that numbering become the same bytes (invented bytes in
    # Chromium's form: elements, then the sorted id index of ISO 32000-1:2008, 14.7.2).
    from planner.report.browser import fixed_pdf_node_ids

    def document(ids):
        elements = b"".join(b"<</S /TD /ID (node%08d)>>\n" % n for n in ids)
        index = b"<</Names [" + b" ".join(b"(node%08d) 1 0 R" % n for n in sorted(ids)) + b"]>>"
        return elements + index

    first = document([25, 26, 31, 27])
    second = document([24, 25, 30, 26])
    assert first != second
    assert fixed_pdf_node_ids(first) == fixed_pdf_node_ids(second)
    fixed = fixed_pdf_node_ids(first)
    assert len(fixed) == len(first)
    assert b"(node00000001)" in fixed
    assert b"(node00000004)" in fixed
    # The index stays sorted: ranks keep the ids' order.
    index = fixed.split(b"[", 1)[1]
    keys = [int(k) for k in re.findall(rb"\(node(\d+)\)", index)]
    assert keys == sorted(keys)
