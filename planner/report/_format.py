"""Numbers, devices, stock and check order written for people (shared by the terminal and the
sheets).

Machine outputs (JSON, CSV) keep full precision; everything here rounds for reading. Volumes are
shown to the reading resolution of the device that delivers them, other quantities to a few
significant figures. :func:`markdown_text` and :func:`csv_text` make text from the plan file
(titles, stock ids, species names, notes) inert in Markdown and in a spreadsheet.
"""

from __future__ import annotations

import math
import re

from planner.analysis import far_off
from planner.inputs import Device, PlanInputs
from planner.result import CHECK_STATUSES, Addition, Check, Mixture, Plan, StockRole, devices_text

__all__ = [
    "addition_decimals",
    "additions_of",
    "checks_worst_first",
    "csv_text",
    "devices_text",
    "is_to_the_mark",
    "markdown_text",
    "percent",
    "plain",
    "scientific",
    "significant",
    "stock_roles",
    "stocks_in_addition_order",
    "volume",
]


def significant(value: float, digits: int = 4) -> str:
    """``value`` with ``digits`` significant figures, fixed-point between 1e-3 and 1e6.

    Outside that range the text is scientific with a short exponent (``1.360e-4``).
    """
    if not math.isfinite(value):
        return str(value)
    if value == 0:
        return "0"
    # Round first, so that 9.99996 becomes 10.00 and not 10.000 (one figure too many).
    rounded = float(f"{value:.{digits - 1}e}")
    magnitude = math.floor(math.log10(abs(rounded)))
    if magnitude < -3 or magnitude >= 6:
        return scientific(value, digits)
    decimals = max(digits - 1 - magnitude, 0)
    return f"{rounded:.{decimals}f}"


def scientific(value: float, digits: int = 4) -> str:
    """``value`` in scientific notation with ``digits`` significant figures (``1.360e-4``)."""
    if not math.isfinite(value):
        return str(value)
    if value == 0:
        return "0"
    mantissa, exponent = f"{value:.{digits - 1}e}".split("e")
    return f"{mantissa}e{int(exponent)}"


def plain(value: float, digits: int = 4) -> str:
    """Like :func:`significant`, without trailing zeros (``250.0`` -> ``250``, ``0.20`` -> ``0.2``).

    For amounts that are set rather than measured: flask sizes, target concentrations, margins.
    """
    text = significant(value, digits)
    if "." in text and "e" not in text:
        text = text.rstrip("0").rstrip(".")
    return text


def percent(fraction: float, digits: int = 3, *, signed: bool = False) -> str:
    """A fraction as a percentage with ``digits`` significant figures (``0.1234`` -> ``12.3 %``)."""
    text = significant(100 * fraction, digits)
    if signed and fraction > 0:
        text = "+" + text
    return f"{text} %"


def relative_bias(fraction: float, digits: int = 3) -> str:
    """A relative bias as a signed percentage (``+7.5 %``), with the factor it amounts to when
    that is past ten either way (``-100 % (a factor of 1.3e-06)``)."""
    text = percent(fraction, digits, signed=True)
    if far_off(fraction):
        text += f" (a factor of {significant(1.0 + fraction, 2)})"
    return text


def is_to_the_mark(addition: Addition) -> bool:
    """True for the diluent filled to the mark of a volumetric flask (DESIGN.md detail 6)."""
    return bool(addition.devices) and all(
        d.startswith("volumetric-flask-") for d in addition.devices
    )


def _decimals_of_step(step_mL: float) -> int:
    """Decimal places that show a reading step (0.01 -> 2, 0.1 -> 1, 0.005 -> 3, 1 -> 0)."""
    if step_mL <= 0 or not math.isfinite(step_mL):
        return 2
    decimals = 0
    # Ten places is far below any bench device; the bound only stops a pathological loop.
    while decimals < 10 and abs(round(step_mL, decimals) - step_mL) > 1e-9 * step_mL:
        decimals += 1
    return decimals


def _device_decimals(device: Device | None) -> int:
    """Decimal places a device's deliveries are read to: those of its reading step
    (:func:`planner.lab.deliveries.reading_step_mL`); fixed-volume glassware is written to
    0.01 mL (common practice for class A pipettes and flasks)."""
    from planner.lab.deliveries import reading_step_mL

    step = reading_step_mL(device) if device is not None else None
    return _decimals_of_step(step) if step is not None else 2


def addition_decimals(inputs: PlanInputs, addition: Addition) -> int:
    """Decimal places to show an addition's volume: the finest of the devices it uses."""
    shelf = {device.id: device for device in inputs.glassware}
    if not addition.devices:
        return 2
    return max(_device_decimals(shelf.get(device_id)) for device_id in addition.devices)


def deliveries_text(inputs: PlanInputs, addition: Addition) -> str:
    """Repeated deliveries as a person reads them: ``2 x 1000 uL, then 650 uL``.

    Empty for an addition of one delivery (or none stated), whose volume says it all. A run
    of equal deliveries of one device reads ``n x volume``; piston pipettes in uL (as they
    are set), every other device in mL to its reading step.
    """
    if len(addition.deliveries) < 2:
        return ""
    shelf = {device.id: device for device in inputs.glassware}
    runs: list[tuple[str, int]] = []
    for delivery in addition.deliveries:
        device = shelf.get(delivery.device)
        decimals = _device_decimals(device)
        if device is not None and device.kind == "piston-pipette":
            text = f"{delivery.volume_mL * 1000.0:.{max(decimals - 3, 0)}f} uL"
        else:
            text = f"{delivery.volume_mL:.{decimals}f} mL"
        if runs and runs[-1][0] == text:
            runs[-1] = (text, runs[-1][1] + 1)
        else:
            runs.append((text, 1))
    return ", then ".join(text if n == 1 else f"{n} x {text}" for text, n in runs)


def amount_text(inputs: PlanInputs, addition: Addition) -> str:
    """An addition's volume with its unit, as the person delivering it sets it: in uL when
    every device it uses is a piston pipette (``40.0 uL``), else in mL (``0.540 mL``); to
    the reading step of its finest device either way."""
    decimals = addition_decimals(inputs, addition)
    kinds = {device.id: device.kind for device in inputs.glassware}
    if addition.devices and all(kinds.get(d) == "piston-pipette" for d in addition.devices):
        return f"{addition.volume_mL * 1000.0:.{max(decimals - 3, 0)}f} uL"
    return f"{volume(addition.volume_mL, decimals)} mL"


def volume(value_mL: float, decimals: int = 2) -> str:
    """A volume to a fixed number of decimals, without the unit."""
    return f"{value_mL:.{decimals}f}"


def stocks_in_addition_order(plan: Plan) -> tuple[str, ...]:
    """Stock ids used by the mixtures, ordered by their first position of addition.

    Ties (and stocks whose order differs between mixtures) fall back to the mean position and
    then to the order of the plan file.
    """
    positions: dict[str, list[int]] = {}
    for mixture in plan.mixtures:
        for addition in mixture.additions:
            positions.setdefault(addition.stock, []).append(addition.order)
    plan_index = {stock.id: i for i, stock in enumerate(plan.inputs.stocks)}
    return tuple(
        sorted(
            positions,
            key=lambda s: (
                min(positions[s]),
                sum(positions[s]) / len(positions[s]),
                plan_index.get(s, len(plan_index)),
                s,
            ),
        )
    )


def stock_roles(inputs: PlanInputs) -> dict[str, StockRole]:
    """Each stock's part in the order of addition: ``diluent``, ``limiting`` or ``excess``."""
    roles: dict[str, StockRole] = {}
    for stock in inputs.stocks:
        if stock.diluent:
            roles[stock.id] = "diluent"
        elif stock.contains_M.get(inputs.design.limiting, 0.0) > 0:
            roles[stock.id] = "limiting"
        else:
            roles[stock.id] = "excess"
    return roles


def additions_of(mixture: Mixture, stock_id: str) -> tuple[Addition, ...]:
    """The additions of one stock to a mixture, in order of addition."""
    return tuple(
        sorted((a for a in mixture.additions if a.stock == stock_id), key=lambda a: a.order)
    )


# ---------------------------------------------------------------------------------------------
# Text from the plan file, made inert for the reader's tools
# ---------------------------------------------------------------------------------------------

#: Characters with inline meaning in CommonMark and GitHub Flavored Markdown, backslash-escaped
#: anywhere: backslash and backtick (escapes, code spans), ``*`` ``_`` ``~`` (emphasis,
#: strikethrough), ``[`` ``]`` (links, images, footnotes) and ``|`` (table cells). ``.``,
#: ``(``, ``)``, ``+``, ``-`` and ``#`` are left alone in the middle of a text, so ``0.10``,
#: ``Fe(SCN)2+`` and ``-12.3 %`` read as written.
_MARKDOWN_INLINE = re.compile(r"([\\`*_~\[\]|])")
#: ``<``, ``>`` (raw HTML, autolinks, block quotes) and ``&`` (entity references) become
#: entity references, which every Markdown dialect passes to HTML as the character itself;
#: a backslash before them is CommonMark's, not every renderer's (Gruber's original Markdown
#: escapes only ``\`*_{}[]()#+-.!``, from memory), and the text keeps no ``<`` at all.
_HTML_SPECIAL = {"&": "&amp;", "<": "&lt;", ">": "&gt;"}
_HTML_SPECIAL_PATTERN = re.compile("[&<>]")
#: Line endings of CommonMark (section 2.1): a value never spans lines of the sheet.
_LINE_BREAK = re.compile(r"\r\n|[\r\n]")
#: A value's start that would open a block if the template put it at the start of a line:
#: an ATX heading (``#`` to ``######`` then a space or nothing), a bullet (``+`` then a space
#: or nothing, ``-`` then a space), an ordered-list marker (up to nine digits, ``.`` or ``)``,
#: then a space or nothing), a thematic break or setext underline (a run of ``=``, or of two
#: or more ``-``). A lone ``-`` is kept: it is the sheets' "no value" placeholder in table
#: cells. CommonMark 0.31.2 sections 4.1, 4.2, 4.3 and 5.2-5.3.
_BLOCK_START = re.compile(
    r"^(?P<space>[ \t]*)(?:"
    r"(?P<heading>#{1,6})(?=[ \t]|$)"
    r"|(?P<bullet>\+(?=[ \t]|$)|-(?=[ \t]))"
    r"|(?P<digits>[0-9]{1,9})(?P<delimiter>[.)])(?=[ \t]|$)"
    r"|(?P<rule>=(?=[-= \t]*$)|-(?=[ \t]*[-=][-= \t]*$))"
    r")"
)
#: A run of ``#`` at a value's end, after a space or tab: in a heading line it would be read as
#: the optional closing sequence and dropped (CommonMark 0.31.2 section 4.2).
_HEADING_CLOSE = re.compile(r"(?<=[ \t])#+[ \t]*$")


def checks_worst_first(checks: tuple[Check, ...]) -> tuple[Check, ...]:
    """Failed checks first, then warnings, then passes; plan order kept within each status.

    A status outside :data:`planner.result.CHECK_STATUSES` sorts after the known ones.
    """
    rank = {status: i for i, status in enumerate(CHECK_STATUSES)}
    # sorted() is stable, so checks of one status keep the order verification gave them.
    return tuple(sorted(checks, key=lambda c: rank.get(c.status, len(rank))))


def markdown_text(value: object) -> str:
    r"""``value`` as text that Markdown shows literally, on one line.

    Line breaks (``\n``, ``\r``) become spaces, so a value cannot start a table row, a heading
    or a list of its own; NUL characters are dropped. The characters with inline meaning in
    CommonMark and GitHub Flavored Markdown (backslash, backtick, ``*``, ``_``, ``~``, ``[``,
    ``]``, ``|``) are backslash-escaped wherever they are, and ``<``, ``>``, ``&`` become the
    entity references ``&lt;``, ``&gt;``, ``&amp;``, so no raw HTML, link, emphasis or extra
    table cell comes out of a title or a stock id. A block marker at the value's start (``#``,
    ``- ``, ``+``, ``1.``, ``---``, ``=``) is escaped too, in case the template places the
    value at the start of a line, and so is a run of ``#`` at its end after a space, which a
    heading would drop as its closing sequence. A lone ``-`` is kept, as the placeholder of an
    empty table cell (the templates never put a value alone at the start of a line, where it
    would open an empty list item). Other characters, the dot among them, are kept, so numbers
    (``0.10``, ``-0.5``, ``7.500e-5``) read as written.

    Parameters
    ----------
    value
        Anything; ``str(value)`` is escaped.

    Returns
    -------
    str
        The escaped text.

    References
    ----------
    CommonMark Spec 0.31.2 (2024), sections 2.1 (line endings), 2.4 (backslash escapes: any
    ASCII punctuation character may be escaped), 2.5 (entity references), 4.1-4.3 (thematic
    breaks, ATX and setext headings), 5.2-5.3 (list items) and 6 (inlines); GitHub Flavored
    Markdown Spec 0.29-gfm (2019), section 4.10 (tables: ``\|`` inside a cell). Section
    numbers from memory.

    Examples
    --------
    >>> markdown_text("a | b <i>")
    'a \\| b &lt;i&gt;'
    >>> markdown_text("0.10")
    '0.10'
    >>> markdown_text("# heading")
    '\\# heading'
    """
    text = _LINE_BREAK.sub(" ", str(value)).replace("\0", "")
    text = _MARKDOWN_INLINE.sub(r"\\\1", text)
    text = _HTML_SPECIAL_PATTERN.sub(lambda special: _HTML_SPECIAL[special[0]], text)
    text = _HEADING_CLOSE.sub(lambda closing: "\\" + closing[0], text)
    match = _BLOCK_START.match(text)
    if match is None:
        return text
    space = match["space"]
    rest = text[match.end() :]
    if match["digits"] is not None:
        return f"{space}{match['digits']}\\{match['delimiter']}{rest}"
    marker = match["heading"] or match["bullet"] or match["rule"]
    return f"{space}\\{marker}{rest}"


#: First characters that make a spreadsheet read a cell as a formula (or, for tab and carriage
#: return, hide one behind white space): OWASP, "CSV Injection",
#: owasp.org/www-community/attacks/CSV_Injection (``=``, ``+``, ``-``, ``@``, tab, carriage
#: return; from memory); OWASP Application Security Verification Standard 5.0.0 (2025),
#: requirement 1.2.10 (``=``, ``+``, ``-``, ``@``, tab and NUL, with RFC 4180 quoting); MITRE
#: CWE-1236, "Improper Neutralization of Formula Elements in a CSV File".
_FORMULA_START = ("=", "+", "-", "@", "\t", "\r")


def csv_text(value: str) -> str:
    """A text cell for a CSV file that a spreadsheet will not run as a formula.

    Common practice (OWASP CSV injection guidance): a text cell that starts with ``=``, ``+``,
    ``-``, ``@``, a tab or a carriage return gets a leading apostrophe, which spreadsheets
    take as "this cell is text" (the cell then shows the apostrophe or hides it, but never
    evaluates). NUL characters, which no text cell needs and some readers stop at, are
    dropped first. Only text cells (ids, names) go through here: numbers the code writes,
    negative ones included, stay numbers. Quoting is the csv module's (RFC 4180).

    Parameters
    ----------
    value
        The text of one cell.

    Returns
    -------
    str
        The cell's text, with an apostrophe in front when it would start a formula.

    Examples
    --------
    >>> csv_text("=1+1")
    "'=1+1"
    >>> csv_text("iron")
    'iron'
    """
    text = value.replace("\0", "")
    return "'" + text if text.startswith(_FORMULA_START) else text
