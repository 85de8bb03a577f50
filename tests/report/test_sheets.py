"""Tests of planner.report.sheets and planner.report.cautions: Markdown, HTML and CSV."""

from __future__ import annotations

import csv
import dataclasses
import io
from html.parser import HTMLParser

import pytest

from planner.inputs import Stock
from planner.report.cautions import CAUTIONS, cautions_for, label_hazards
from planner.report.sheets import (
    BenchSlot,
    answer_key_html,
    answer_key_md,
    bench_sheet_html,
    bench_sheet_md,
    mixtures_csv,
    prep_sheet_html,
    prep_sheet_md,
    readings_template_csv,
)
from planner.result import Addition
from tests.report.conftest import PRECISE_VOLUME_mL, make_inputs, make_plan

DATE = "2031-02-03"
IDS = ("B1", "S1", "S2", "T1", "T2")
CAUTION_TEXT = {c.key: c.text for c in CAUTIONS}

# Words of the lines every sheet carries, whatever the chemicals.
ALWAYS = ("eye protection and a lab coat", "labelled waste container", "may fade", "safety data")


def _sheets(plan):
    return {
        "bench.md": bench_sheet_md(plan, date=DATE, slot=BenchSlot(1, 2)),
        "bench.html": bench_sheet_html(plan, date=DATE, slots=[BenchSlot(1, 2)]),
        "prep.md": prep_sheet_md(plan, date=DATE),
        "prep.html": prep_sheet_html(plan, date=DATE),
        "answer.md": answer_key_md(plan, date=DATE),
        "answer.html": answer_key_html(plan, date=DATE),
    }


class _Structure(HTMLParser):
    """Records tags, and fails on a closing tag that does not match the open one."""

    VOID = frozenset({"meta", "br", "hr", "img", "input", "link"})

    def __init__(self):
        super().__init__()
        self.stack = []
        self.starts = []
        self.classes = []
        self.errors = []
        self.cells = []
        self._in_cell = False

    def handle_starttag(self, tag, attrs):
        self.starts.append(tag)
        self.classes.append((tag, dict(attrs).get("class", "")))
        if tag in ("td", "th"):
            self._in_cell = True
            self.cells.append("")
        if tag not in self.VOID:
            self.stack.append(tag)

    def handle_endtag(self, tag):
        if not self.stack or self.stack[-1] != tag:
            self.errors.append(f"unexpected </{tag}> with open {self.stack[-3:]}")
            return
        self.stack.pop()
        if tag in ("td", "th"):
            self._in_cell = False

    def handle_data(self, data):
        if self._in_cell:
            self.cells[-1] += data


def _parse(html):
    parser = _Structure()
    parser.feed(html)
    parser.close()
    assert parser.errors == []
    assert parser.stack == []
    return parser


@pytest.mark.parametrize("name", ["bench.md", "bench.html", "prep.md", "prep.html"])
def test_sheets_carry_cautions_for_iron_thiocyanate_in_acid(plan, name):
    text = _sheets(plan)[name]
    for line in cautions_for(plan.inputs):
        assert line in text
    for words in ALWAYS:
        assert words in text
    assert "thiocyanate salts release a very toxic gas" in text
    assert "iron(III) nitrate is an oxidiser" in text
    assert "Acids are corrosive" in text


@pytest.mark.parametrize("name", ["answer.md", "answer.html"])
def test_answer_key_carries_cautions(plan, name):
    text = _sheets(plan)[name]
    for line in cautions_for(plan.inputs):
        assert line in text


def test_chemical_lines_only_when_the_ion_is_in_a_stock():
    stocks = (
        Stock(id="metal", contains_M={"Cu2+": 0.02, "H+": 0.05}),
        Stock(id="ligand", contains_M={"L-": 0.5, "Na+": 0.5}),
        Stock(id="salt", contains_M={"Na+": 0.1}, diluent=True),
    )
    lines = cautions_for(make_inputs(stocks=stocks))
    text = "\n".join(lines)
    assert "thiocyanate" not in text
    assert "iron(III)" not in text
    assert "Acids are corrosive" not in text  # H+ 0.05 mol/L is below the 0.1 mol/L threshold
    assert CAUTION_TEXT["copper-silver"] in lines  # the copper(II) stock
    assert len(lines) == 5
    for words in ALWAYS:
        assert words in text


def test_acid_line_from_0_1_mol_per_L():
    stocks = (Stock(id="diluent", contains_M={"H+": 0.1}, diluent=True),)
    assert CAUTION_TEXT["acid"] in cautions_for(make_inputs(stocks=stocks))


def test_thiocyanate_line_with_scn_and_sheet_without(plan):
    stocks = tuple(s for s in plan.inputs.stocks if s.id != "thiocyanate")
    without = dataclasses.replace(plan, inputs=make_inputs(stocks=stocks))
    assert "thiocyanate salts" not in bench_sheet_md(without, date=DATE, slot=BenchSlot(1))
    assert "thiocyanate salts" in bench_sheet_md(plan, date=DATE, slot=BenchSlot(1))


def test_label_hazards(plan):
    assert label_hazards(plan.inputs.stock("thiocyanate")) == (
        "corrosive (acid)",
        "thiocyanate: keep away from concentrated acid",
    )
    assert label_hazards(Stock(id="water", contains_M={})) == ()


def test_fading_line_names_the_coloured_complex(plan):
    assert any("(FeSCN2+) may fade" in line for line in cautions_for(plan.inputs))


def test_bench_sheet_markdown(plan):
    text = bench_sheet_md(plan, date=DATE, slot=BenchSlot(2, 3))
    assert plan.inputs.title in text
    assert DATE in text
    assert "Section 2 of 2" in text
    assert "Bench 3 of 3" in text
    for mixture_id in IDS:
        assert f"| {mixture_id} (" in text
    # One tick box per addition: B1 has 2 additions, the four others 3 each.
    assert text.count("[ ]") == 2 + 4 * 3
    header = next(line for line in text.splitlines() if line.startswith("| Mixture"))
    assert header.index("1. diluent") < header.index("2. iron") < header.index("3. thiocyanate")
    assert "4.00 mL, 2 × transfer-pipette-2mL" in text
    assert "4.1 mL, graduated-pipette-10mL" in text
    assert "diluent first, then the reagent in excess, the limiting reagent last" in text
    assert "Tubes: the additions make up the total volume" in text


def test_bench_sheet_blank_bench_number(plan):
    text = bench_sheet_md(plan, date=DATE, slot=BenchSlot(1))
    assert "Bench ______ of 3" in text


def test_bench_sheet_in_flasks_says_to_the_mark(plan):
    inputs = dataclasses.replace(
        plan.inputs, design=dataclasses.replace(plan.inputs.design, vessel="flask-10")
    )
    mixtures = tuple(
        dataclasses.replace(
            m,
            additions=tuple(
                dataclasses.replace(a, devices=("volumetric-flask-10mL",), order=len(m.additions))
                if a.stock == "diluent"
                else dataclasses.replace(a, order=a.order - 1)
                for a in m.additions
            ),
        )
        for m in plan.mixtures
    )
    flask_plan = dataclasses.replace(plan, inputs=inputs, mixtures=mixtures)
    text = bench_sheet_md(flask_plan, date=DATE, slot=BenchSlot(1, 1))
    assert "[ ] to the mark, volumetric-flask-10mL" in text
    assert "Flasks are filled to the mark with the diluent (diluent)" in text
    assert "the limiting reagent, the diluent to the mark last" in text
    assert "Tubes:" not in text
    header = next(line for line in text.splitlines() if line.startswith("| Mixture"))
    assert header.index("1. iron") < header.index("3. diluent")


def test_bench_sheet_html_is_well_formed_one_page_per_bench(plan):
    slots = [BenchSlot(1, 1), BenchSlot(1, 2), BenchSlot(2, None)]
    html = bench_sheet_html(plan, date=DATE, slots=slots)
    parsed = _parse(html)
    assert parsed.starts.count("table") == 3
    assert [c for t, c in parsed.classes if t == "section"] == ["page"] * 3
    assert len([c for t, c in parsed.classes if t == "span" and c == "box"]) == 3 * 14
    cells = [cell.strip() for cell in parsed.cells]
    for mixture_id in IDS:
        assert any(cell.startswith(mixture_id) for cell in cells)
    assert "page-break-after: always" in html
    assert "@page { size: auto" in html
    assert "<link" not in html
    assert "src=" not in html
    assert html.count("Cautions</h2>") == 3


def test_bench_sheet_html_needs_a_slot(plan):
    with pytest.raises(ValueError, match="at least one"):
        bench_sheet_html(plan, date=DATE, slots=[])


@pytest.mark.parametrize("name", ["prep.html", "answer.html", "bench.html"])
def test_html_sheets_are_well_formed(plan, name):
    parsed = _parse(_sheets(plan)[name])
    assert "table" in parsed.starts
    assert parsed.starts[0] == "html"


def test_html_escapes_plan_text(plan):
    hostile = dataclasses.replace(
        plan, inputs=dataclasses.replace(plan.inputs, title="<script>x</script> & co")
    )
    html = prep_sheet_html(hostile, date=DATE)
    assert "<script>" not in html
    assert "&lt;script&gt;x&lt;/script&gt; &amp; co" in html


def test_markdown_cells_escape_pipes(plan):
    piped = dataclasses.replace(
        plan,
        checks=(
            dataclasses.replace(plan.checks[1], detail="a | b"),
            *plan.checks[2:],
        ),
    )
    assert "| a \\| b |" in prep_sheet_md(piped, date=DATE)


def test_prep_sheet(plan):
    text = prep_sheet_md(plan, date=DATE)
    assert DATE in text
    assert "| iron | 1 × 250 mL | Fe(NO3)3(H2O)9 | 403.99 g/mol | 98 % | 20.61 g |" in text
    assert "| thiocyanate | 1 × 250 mL | KSCN | 97.180 g/mol | 99 % | 0.04900 g |" in text
    assert "0.5 mol/L HNO3" in text
    # Totals: per bench, per section (x3 benches), session (x6), to prepare, available.
    assert "| iron | 19.00 | 57.00 | 114.0 | 161.1 | 400.0 | enough" in text
    assert "**SHORT of the margin" in text
    assert "dead volume of 5 mL" in text
    assert "margin 15 %" in text
    # One label per stock, with its hazard words.
    for stock in ("iron", "thiocyanate", "diluent"):
        assert f"> **{stock}**" in text
    assert "Contains: SCN- 0.002 mol/L, H+ 0.5 mol/L" in text
    assert "Caution: corrosive (acid); thiocyanate: keep away from concentrated acid" in text
    assert "limiting-reagent-assumption" in text  # the failed check is shown
    assert text.index("**FAIL**") < text.index("**WARN**")
    assert "absorbance-window" not in text  # a passing check is not


def test_prep_sheet_gives_the_dilution_recipe_and_the_medium(plan):
    # Issue 11, item 9: a stock made by dilution says from which stock and how much per
    # flask; one with neither solid nor source says it must be supplied; the totals line says
    # what making the stocks takes (the fixture's numbers, invented: 2 x 12.5 mL of iron per
    # two 250 mL flasks, 475 + 250 + 250 = 975 mL of diluent).
    dilute = dataclasses.replace(
        plan.preparations[0],
        stock="iron-low",
        solid_formula="",
        molar_mass_g_per_mol=0.0,
        mass_g=0.0,
        flasks=2,
        concentration_M=0.01,
        source="iron",
        aliquot_mL=12.5,
    )
    supplied = dataclasses.replace(dilute, stock="ligand", source="", aliquot_mL=0.0)
    totals = dataclasses.replace(plan.totals, for_stocks={"iron": 25.0, "diluent": 975.0})
    edited = dataclasses.replace(
        plan, preparations=(*plan.preparations, dilute, supplied), totals=totals
    )
    for text in (prep_sheet_md(edited, date=DATE), prep_sheet_html(edited, date=DATE)):
        assert "none: dilute 12.50 mL of iron per flask to the mark" in text
        assert "none listed: must be supplied ready-made" in text
        assert "25.00 mL of iron, 975.0 mL of diluent" in text


def test_answer_key(plan):
    text = answer_key_md(plan, date=DATE)
    for mixture_id in IDS:
        assert f"| {mixture_id} (" in text
    assert "[FeSCN2+] (mol/L)" in text
    assert "| S1 (standard) | 0.357 | 0.0031 | 7.500e-5 | 0.909 | 0.560 |" in text
    assert "| B1 (blank) | 0.012 | 0.0031 | 0 | 0.000 | 0.560 |" in text
    assert "| K of FeSCN2+ (L/mol) | 112.3 | 7.2 | 100.0 |" in text
    assert "| 4182 | 62 | 4600 |" in text
    assert "Relative bias of K from the all-bound assumption: +12.3 %." in text
    assert "T1 110.1; T2 114.6 L/mol" in text


def test_answer_key_without_prediction(plan):
    text = answer_key_md(dataclasses.replace(plan, prediction=None), date=DATE)
    assert "No prediction" in text


def test_mixtures_csv(plan):
    text = mixtures_csv(plan)
    assert "\r" not in text
    rows = list(csv.DictReader(io.StringIO(text)))
    assert list(rows[0]) == [
        "id",
        "role",
        "total_volume_mL",
        "volume_diluent_mL",
        "volume_iron_mL",
        "volume_thiocyanate_mL",
        "absorbance",
        "u_absorbance",
        "bound_fraction",
        "ionic_strength_M",
        "FeSCN2+_M",
        "Fe(SCN)2+_M",
    ]
    assert [r["id"] for r in rows] == list(IDS)
    assert [r["role"] for r in rows] == ["blank", "standard", "standard", "test", "test"]
    assert float(rows[1]["volume_thiocyanate_mL"]) == PRECISE_VOLUME_mL
    assert float(rows[0]["volume_thiocyanate_mL"]) == 0.0
    assert float(rows[1]["FeSCN2+_M"]) == 7.5e-5
    assert float(rows[3]["bound_fraction"]) == 0.45


def test_csv_sums_repeated_additions(plan):
    s2 = plan.mixtures[2]
    split = dataclasses.replace(
        s2,
        additions=(
            *s2.additions,
            Addition("iron", 0.5, ("transfer-pipette-5mL",), 4),
        ),
    )
    twice = dataclasses.replace(plan, mixtures=(plan.mixtures[0], split))
    rows = list(csv.DictReader(io.StringIO(mixtures_csv(twice))))
    assert float(rows[1]["volume_iron_mL"]) == 5.5


def test_sheets_are_deterministic():
    assert _sheets(make_plan()) == _sheets(make_plan())


# ---------------------------------------------------------------------------------------------
# The readings template and the bench sheet's reading column
# ---------------------------------------------------------------------------------------------


def _with_replicates(plan, replicates):
    session = dataclasses.replace(plan.inputs.session, replicates=replicates)
    return dataclasses.replace(plan, inputs=dataclasses.replace(plan.inputs, session=session))


def test_readings_template_has_a_row_per_section_bench_replicate_and_mixture():
    plan = _with_replicates(make_plan(), 2)  # 2 sections x 3 benches x 2 replicates x 5
    rows = list(csv.reader(io.StringIO(readings_template_csv([(1, plan), (2, plan)]))))
    assert rows[0] == ["section", "bench", "replicate", "mixture", "absorbance"]
    body = rows[1:]
    assert len(body) == 2 * 3 * 2 * len(IDS)
    # Section, then bench, then replicate, then the mixtures in sheet order; absorbance empty.
    assert body[: len(IDS)] == [["1", "1", "1", m, ""] for m in IDS]
    assert body[len(IDS)] == ["1", "1", "2", "B1", ""]
    assert body[-1] == ["2", "3", "2", "T2", ""]
    keys = {tuple(r[:4]) for r in body}
    assert len(keys) == len(body)


def test_readings_template_numbers_a_variant_section_by_its_own_number():
    rows = list(csv.reader(io.StringIO(readings_template_csv([(7, make_plan())]))))
    assert {r[0] for r in rows[1:]} == {"7"}


def test_bench_sheet_has_a_reading_column_per_replicate():
    one = bench_sheet_md(make_plan(), date=DATE, slot=BenchSlot(1, 2))
    header = next(line for line in one.splitlines() if line.startswith("| Mixture"))
    assert header.rstrip().endswith("Total | Reading |")
    row = next(line for line in one.splitlines() if line.startswith("| T2"))
    assert row.rstrip().endswith("| ______ |")
    two = bench_sheet_md(_with_replicates(make_plan(), 2), date=DATE, slot=BenchSlot(1, 2))
    assert "| Reading 1 | Reading 2 |" in two
    html = bench_sheet_html(_with_replicates(make_plan(), 2), date=DATE, slots=[BenchSlot(1, 2)])
    assert html.count('<th class="reading">') == 2
    assert html.count('<td class="reading"></td>') == 2 * len(IDS)


def test_a_constant_medium_s_salt_and_a_perchlorate_get_their_cautions():
    # Perchlorate and nitrate salts are oxidisers as solids (any safety data sheet of them);
    # a plan weighing one for a constant ionic medium says so, and a perchlorate in a stock
    # gets its own line and label. Without a medium, neither line.
    from pathlib import Path

    from planner.planfile import load_plan, parse_plan

    root = Path(__file__).resolve().parents[2]
    default = load_plan(root / "planner" / "data" / "default.toml")
    lines = "\n".join(cautions_for(default))
    assert "Inert salt: the constant ionic medium is made with solid NaNO3" in lines
    assert "Perchlorate" not in lines
    tubes = load_plan(root / "recipes" / "iron-thiocyanate-tubes.toml")
    assert "Inert salt" not in "\n".join(cautions_for(tubes))
    text = (root / "planner" / "data" / "default.toml").read_text(encoding="utf-8")
    perchlorate = parse_plan(text.replace('salt = "NaNO3"', 'salt = "NaClO4"'))
    lines = "\n".join(cautions_for(perchlorate))
    assert "Perchlorate: perchlorate salts are strong oxidisers" in lines
    assert "oxidiser (perchlorate)" in label_hazards(perchlorate.stock("acid"))


@pytest.mark.parametrize(
    ("ion", "key"),
    [
        ("Ni2+", "nickel"),
        ("Ni^2+", "nickel"),
        ("NiCl+", "nickel"),
        ("Co2+", "cobalt"),
        ("Cr2O7 2-", "chromium-vi"),
        ("CrO42-", "chromium-vi"),
        ("Cd2+", "toxic-metal"),
        ("Hg2 2+", "toxic-metal"),
        ("Pb2+", "toxic-metal"),
        ("Cu2+", "copper-silver"),
        ("Ag+", "copper-silver"),
    ],
)
def test_heavy_metals_get_their_line_and_label_in_any_notation(ion, key):
    # Nickel, cobalt and chromium(VI) salts are classed carcinogens and sensitisers, cadmium,
    # mercury and lead salts toxic, copper and silver salts very toxic to aquatic life
    # (Regulation (EC) No 1272/2008, Annex VI, from memory): a stock holding one gets the line
    # and its bottle the label, whatever notation the plan file writes the ion in.
    stocks = (
        Stock(id="metal", contains_M={ion: 0.01, "NO3-": 0.02}),
        Stock(id="water", contains_M={}, diluent=True),
    )
    caution = next(c for c in CAUTIONS if c.key == key)
    assert caution.text in cautions_for(make_inputs(stocks=stocks))
    assert caution.label in label_hazards(stocks[0])
    assert label_hazards(stocks[1]) == ()


def test_element_lines_read_symbols_not_letters():
    # Carbonate is C and O, not cobalt; a ligand named NiL2 is nickel; none of the heavy-metal
    # lines for iron thiocyanate in acid.
    carbonate = Stock(id="carbonate", contains_M={"CO3 2-": 0.1, "Na+": 0.2})
    assert not any(c.key == "cobalt" and c.applies_to(carbonate) for c in CAUTIONS)
    heavy = {"nickel", "cobalt", "chromium-vi", "toxic-metal", "copper-silver"}
    assert {c.key for c in CAUTIONS} >= heavy
    iron = make_inputs()
    texts = {c.key: c.text for c in CAUTIONS}
    assert not any(texts[k] in cautions_for(iron) for k in heavy)


@pytest.mark.parametrize(
    ("volume_mL", "text"),
    [(1206.4, "1206"), (81.3, "81"), (10.0, "10"), (4.23, "4.2"), (0.354, "0.35"), (-3.0, "-3")],
)
def test_a_stock_volume_in_a_verdict_has_no_more_figures_than_the_totals(volume_mL, text):
    from planner.result import stock_volume_text

    assert stock_volume_text(volume_mL) == text


def test_the_prep_sheet_and_the_inventory_check_give_one_shortfall():
    # 1806 mL to prepare against 600 available: both say 1206 (the sheet said 1210, three
    # figures, beside the check's 1206).
    from planner.report.sheets import _availability
    from planner.verify import _inventory

    assert _availability(600.0, 1382.0, 1806.2) == "SHORT by 1206 mL"
    inputs = make_inputs()
    stock = inputs.stocks[0]
    short = dataclasses.replace(inputs, stocks=(dataclasses.replace(stock, available_mL=600.0),))
    totals = make_plan().totals
    need = {stock.id: 1806.2}
    check = _inventory(short, dataclasses.replace(totals, to_prepare=need))
    assert "(short 1206 mL)" in check.detail


def test_volumes_to_the_mark_carry_no_float_noise():
    # A flask's diluent is what the reagents leave (10 - 7.5 - 0.1): written to the
    # nanolitre, as every other volume, so the CSV reads 2.4 and not 2.4000000000000004.
    from planner.pipeline import design_plan
    from planner.planfile import parse_plan
    from planner.report.sheets import mixtures_csv
    from tests.plans import MICRO_FLASKS

    plan = design_plan(parse_plan(MICRO_FLASKS))
    rows = list(csv.DictReader(io.StringIO(mixtures_csv(plan))))
    volumes = [row[k] for row in rows for k in row if k.startswith("volume_")]
    assert len(volumes) == 3 * len(plan.mixtures)
    assert all(len(v.partition(".")[2]) <= 6 for v in volumes), volumes


def test_a_ready_made_stock_and_the_medium_are_told_apart_on_the_prep_sheet():
    # Neither is weighed or diluted; the medium is named as such, a stock nothing on the
    # shelf makes is to be supplied ready-made and names no medium it was made up in (the
    # totals take no medium for it either).
    from pathlib import Path

    from planner.design.logistics import preparations, stock_totals
    from planner.planfile import load_plan
    from planner.report.sheets import _preparation_rows
    from tests.plans import plan_of

    default = Path(__file__).resolve().parents[2] / "planner" / "data" / "default.toml"
    inputs = load_plan(default)
    inputs = dataclasses.replace(
        inputs,
        stocks=tuple(
            dataclasses.replace(st, solid=None) if st.id == "thiocyanate" else st
            for st in inputs.stocks
        ),
    )
    plan = plan_of(default)
    totals = stock_totals(inputs, plan.mixtures)
    edited = dataclasses.replace(
        plan, inputs=inputs, totals=totals, preparations=preparations(inputs, totals)
    )
    rows = {row.stock: row for row in _preparation_rows(edited)}
    assert rows["thiocyanate"].solid == "none listed: must be supplied ready-made"
    assert rows["thiocyanate"].medium == "-"
    assert rows["acid"].solid == "none listed (the medium itself)"


def test_the_solvent_alone_is_set_out_not_made_up_in_flasks():
    # A diluent with nothing dissolved (water) and no inert salt needs no volumetric flask
    # and no recipe: its prep row names no flasks and its label says it holds no reagent,
    # where an acid medium keeps its flasks and its concentrations (the default plan's acid,
    # 0.5 mol/L, salted to a constant ionic medium).
    from pathlib import Path

    from planner.design.logistics import preparations, stock_totals
    from planner.planfile import load_plan
    from tests.plans import plan_of

    default = Path(__file__).resolve().parents[2] / "planner" / "data" / "default.toml"
    plan = plan_of(default)
    acid = _prep_rows(plan)["acid"]
    assert acid.flasks.endswith("× 2000 mL")
    assert "Contains: H+ 0.5 mol/L" in prep_sheet_md(plan, date=DATE)

    inputs = load_plan(default)
    inputs = dataclasses.replace(
        inputs,
        stocks=tuple(
            dataclasses.replace(st, contains_M={}, medium_salt_M=0.0)
            if st.id == "acid"
            else dataclasses.replace(st, medium_salt_M=0.0)
            for st in inputs.stocks
        ),
        design=dataclasses.replace(inputs.design, ionic_medium=None),
    )
    totals = stock_totals(inputs, plan.mixtures)
    water = dataclasses.replace(
        plan, inputs=inputs, totals=totals, preparations=preparations(inputs, totals)
    )
    row = _prep_rows(water)["acid"]
    assert row.flasks == "-"
    assert row.solid.startswith("none: the solvent itself")
    for text in (prep_sheet_md(water, date=DATE), prep_sheet_html(water, date=DATE)):
        assert "Contains: the solvent alone, no reagent" in text
        assert "Contains: </" not in text
        assert "Contains:  \n" not in text


def _prep_rows(plan):
    from planner.report.sheets import _preparation_rows

    return {row.stock: row for row in _preparation_rows(plan)}
