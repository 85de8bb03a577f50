"""The cautions block every printed sheet carries (DESIGN.md section 3, "Cautions").

One table, :data:`CAUTIONS`, holds every line; the Markdown and HTML sheets and the bottle
labels all read it. A chemical-specific line is shown only when some stock of the plan holds the
matching ion (by its name in the trade's notation) at or above the line's threshold; the
general lines are always shown.

The wording is a reminder of well-known hazards (common practice), not a risk assessment: the
last line defers to the safety data sheets, local rules and the responsible staff.
"""

from __future__ import annotations

from planner.chem.species import element_symbols
from planner.inputs import PlanInputs, Stock
from planner.records import record

__all__ = ["CAUTIONS", "Caution", "cautions_for", "label_hazards"]


@record
class Caution:
    """One line of the cautions block.

    Attributes
    ----------
    key
        The line's stable name, by which code and tests pick it out.
    text
        The line; ``{product}`` is replaced by the coloured product's name(s).
    ions
        Ion names that call for the line; empty means the line is always shown.
    min_M
        Smallest stock concentration of one of ``ions`` that calls for the line [mol/L]; 0
        means any amount.
    elements
        Element symbols that call for the line in any ion a stock holds, whatever its
        notation or oxidation state (``"Ni"`` in ``"Ni2+"``, ``"Ni^2+"`` or ``"NiCl+"``).
    label
        Short hazard words for the label of a bottle holding the ion, or ``""``.
    """

    key: str
    text: str
    ions: tuple[str, ...] = ()
    min_M: float = 0.0
    label: str = ""
    elements: tuple[str, ...] = ()

    def applies_to(self, stock: Stock) -> bool:
        """True when ``stock`` holds one of the ions at or above the threshold, or any
        amount of an ion made of one of the elements."""
        for ion in self.ions:
            concentration_M = stock.contains_M.get(ion, 0.0)
            if concentration_M > 0 and concentration_M >= self.min_M:
                return True
        return any(
            concentration_M > 0 and not element_symbols(ion).isdisjoint(self.elements)
            for ion, concentration_M in stock.contains_M.items()
        )

    @property
    def chemical(self) -> bool:
        """True for a line that only some stocks call for."""
        return bool(self.ions or self.elements)


#: Every cautions line, chemical-specific ones first, in the order sheets print them.
CAUTIONS: tuple[Caution, ...] = (
    Caution(
        key="acid",
        text=(
            "Acid: the solutions of this plan contain acid (H+ 0.1 mol/L or more). Acids are "
            "corrosive: avoid contact with skin and eyes and rinse any splash with plenty of "
            "water."
        ),
        # 0.1 mol/L: the threshold this project uses for calling a stock "acid" on sheets.
        ions=("H+", "H3O+"),
        min_M=0.1,
        label="corrosive (acid)",
    ),
    Caution(
        key="thiocyanate",
        text=(
            "Thiocyanate: thiocyanate salts release a very toxic gas with strong acid in "
            "concentrated form. Never add concentrated acid to the solid or to concentrated "
            "thiocyanate solutions; keep the solid apart from acids."
        ),
        ions=("SCN-",),
        label="thiocyanate: keep away from concentrated acid",
    ),
    Caution(
        key="iron-nitrate",
        text=(
            "Iron(III): iron(III) nitrate is an oxidiser. Keep the solid away from combustible "
            "material and wipe up spilt solid at once."
        ),
        ions=("Fe3+",),
    ),
    Caution(
        key="perchlorate",
        text=(
            "Perchlorate: perchlorate salts are strong oxidisers. Keep the solid and its "
            "solutions away from organic material, reducing agents and heat, never let a "
            "spill dry on wood, paper or cloth, and collect perchlorate waste apart."
        ),
        ions=("ClO4-",),
        label="oxidiser (perchlorate)",
    ),
    # The heavy-metal lines follow the harmonised EU classifications of their common salts
    # (Regulation (EC) No 1272/2008, Annex VI; from memory): nickel and cobalt salts Carc. 1A
    # or 1B by inhalation and respiratory and skin sensitisers; chromium(VI) Carc. 1B and an
    # oxidiser; cadmium, mercury and lead salts toxic (Cd Carc. 1B, Pb Repr. 1A); copper and
    # silver salts very toxic to aquatic life (silver nitrate also corrosive). Only the
    # hazards a prep room acts on are named; the safety data sheet has the rest.
    Caution(
        key="nickel",
        text=(
            "Nickel: nickel salts may cause cancer if their dust is breathed in and may cause "
            "allergic skin and breathing reactions. Wear gloves, weigh the solid without "
            "raising dust, and collect every nickel solution for heavy-metal waste, never down "
            "the drain."
        ),
        elements=("Ni",),
        label="nickel: may cause cancer (dust), sensitiser",
    ),
    Caution(
        key="cobalt",
        text=(
            "Cobalt: cobalt salts may cause cancer if their dust is breathed in and may cause "
            "allergic skin and breathing reactions. Wear gloves, weigh the solid without "
            "raising dust, and collect every cobalt solution for heavy-metal waste, never down "
            "the drain."
        ),
        elements=("Co",),
        label="cobalt: may cause cancer (dust), sensitiser",
    ),
    Caution(
        key="chromium-vi",
        text=(
            "Chromium(VI): chromate and dichromate may cause cancer and allergic reactions "
            "and are oxidisers. Wear gloves, weigh the solid without raising dust, keep it "
            "from combustible material, and collect chromium waste apart."
        ),
        ions=("CrO42-", "CrO4 2-", "CrO4^2-", "HCrO4-", "Cr2O72-", "Cr2O7 2-", "Cr2O7^2-"),
        label="chromium(VI): may cause cancer, oxidiser",
    ),
    Caution(
        key="toxic-metal",
        text=(
            "Cadmium, mercury and lead: their salts are toxic if swallowed or their dust "
            "breathed in, and harm the unborn child or the kidneys with repeated exposure. "
            "Wear gloves, never pipette by mouth, and collect every such solution for "
            "heavy-metal waste, never down the drain."
        ),
        elements=("Cd", "Hg", "Pb"),
        label="toxic heavy metal",
    ),
    Caution(
        key="copper-silver",
        text=(
            "Copper and silver: their salts are harmful if swallowed and very toxic to aquatic "
            "life (silver nitrate also burns skin and stains it black). Wear gloves and collect "
            "the solutions for heavy-metal waste, never down the drain."
        ),
        elements=("Cu", "Ag"),
        label="toxic to aquatic life",
    ),
    Caution(
        key="medium-salt",
        text=(
            "Inert salt: the constant ionic medium is made with solid {salt} (the masses are on "
            "the prep-room sheet). Read its safety data sheet before weighing; a nitrate or "
            "perchlorate salt is an oxidiser as a solid, so keep it away from combustible "
            "material."
        ),
    ),
    Caution(key="eyes", text="Wear eye protection and a lab coat at all times."),
    Caution(
        key="waste",
        text=(
            "Waste: pour mixtures, rinsings and left-over stocks into the labelled waste "
            "container, as local rules require."
        ),
    ),
    Caution(
        key="fading",
        text=(
            "{product} may fade with time: read each absorbance promptly after mixing, and "
            "at the same delay for every mixture."
        ),
    ),
    Caution(
        key="defer",
        text=(
            "These notes are a reminder, not a risk assessment: the safety data sheets, local "
            "rules and the responsible staff come first."
        ),
    ),
)


def _product_phrase(inputs: PlanInputs) -> str:
    coloured = [sp.name for sp in inputs.reaction.species if sp.epsilon > 0]
    if not coloured:
        return "The coloured product"
    noun = "complex" if len(coloured) == 1 else "complexes"
    return f"The coloured {noun} ({', '.join(coloured)})"


def cautions_for(inputs: PlanInputs) -> tuple[str, ...]:
    """The cautions lines for a plan, in :data:`CAUTIONS` order.

    Parameters
    ----------
    inputs
        The plan's inputs; its stocks decide which chemical-specific lines appear.

    Returns
    -------
    tuple of str
        One finished line per caution that applies.
    """
    lines = []
    medium = inputs.design.ionic_medium
    for caution in CAUTIONS:
        if caution.chemical and not any(caution.applies_to(stock) for stock in inputs.stocks):
            continue
        if caution.key == "medium-salt":
            # Only a plan with a constant ionic medium weighs an inert salt.
            if medium is None:
                continue
            lines.append(caution.text.replace("{salt}", medium.salt))
            continue
        lines.append(caution.text.replace("{product}", _product_phrase(inputs)))
    return tuple(lines)


def label_hazards(stock: Stock) -> tuple[str, ...]:
    """Short hazard words for a stock's bottle label (empty when none apply)."""
    return tuple(
        caution.label for caution in CAUTIONS if caution.label and caution.applies_to(stock)
    )
