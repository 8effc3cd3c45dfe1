"""The declared build-up entered through form fields (layers of a material and thickness, a cavity),
kept in the test's settings as construction-file text, which the store and the calculator read."""

from __future__ import annotations

import json
import tomllib
from dataclasses import dataclass

import streamlit as st

from fieldtl.construction import MATERIALS

LAYERS_PER_LEAF = 3
NONE = ""                     # "no layer" in a material picker
FILLS = {"none": "empty", "partial": "partly filled with absorber", "full": "filled with absorber"}
STUDS = {"independent": "separate frames (no shared studs)", "timber": "timber studs or joists",
         "steel": "steel studs", "none": "no studs (leaves tied only at the edges)"}


@dataclass(frozen=True, slots=True)
class BuildUp:
    leaves: tuple[tuple[tuple[str, float], ...], ...]     # per leaf: (material, thickness mm) layers
    cavity_mm: float = 0.0
    fill: str = "none"
    studs: str = "independent"
    fits_form: bool = True     # False: the stored text holds more than the form shows (kept as it is)


def material_words(name: str) -> str:
    return "(no layer)" if name == NONE else name.replace("_", " ")


def parse(text: str) -> BuildUp:
    """The stored construction-file text as form values ("" gives an empty build-up)."""
    if not text.strip():
        return BuildUp(leaves=())
    try:
        data = tomllib.loads(text)
        leaves = tuple(tuple((item.split(":")[0], float(item.split(":")[1])) for item in leaf["layers"])
                       for leaf in data.get("leaf", []))
        cavity = data.get("cavity", {})
        known = set(data) <= {"name", "leaf", "cavity"} and set(cavity) <= {"depth_mm", "fill", "studs"}
        fits = (known and len(leaves) <= 2 and all(len(leaf) <= LAYERS_PER_LEAF for leaf in leaves)
                and all(m in MATERIALS for leaf in leaves for m, _ in leaf))
        return BuildUp(leaves, float(cavity.get("depth_mm", 0.0)), cavity.get("fill", "none"),
                       cavity.get("studs", "independent"), fits)
    except (tomllib.TOMLDecodeError, KeyError, ValueError, IndexError, TypeError, AttributeError):
        return BuildUp(leaves=(), fits_form=False)


def fields(stored: str) -> BuildUp:
    """Draw the build-up fields (inside the set-up form) filled from ``stored``; return what they hold."""
    old = parse(stored)
    names = [NONE, *sorted(MATERIALS)]
    st.markdown("**Declared build-up for the construction check** (optional)")
    if not old.fits_form:
        st.caption("The stored build-up holds more than these fields show (own materials or more layers); "
                   "it is kept as it is unless you change a field below.")
    leaves = []
    for leaf_index, leaf_title in enumerate(("First leaf (the wall or floor itself)",
                                             "Second leaf (a lining on a cavity; leave empty if none)")):
        st.caption(leaf_title)
        old_leaf = old.leaves[leaf_index] if leaf_index < len(old.leaves) else ()
        layers = []
        for i in range(LAYERS_PER_LEAF):
            material, thickness = old_leaf[i] if i < len(old_leaf) else (NONE, 0.0)
            left, right = st.columns([3, 2])
            chosen = left.selectbox(f"Leaf {leaf_index + 1}, layer {i + 1}: material", names,
                                    index=names.index(material) if material in names else 0,
                                    format_func=material_words, key=f"buildup-{leaf_index}-{i}-material")
            mm = right.number_input(f"Leaf {leaf_index + 1}, layer {i + 1}: thickness, mm", min_value=0.0,
                                    max_value=2000.0, value=float(thickness), step=1.0,
                                    key=f"buildup-{leaf_index}-{i}-mm")
            if chosen != NONE:
                layers.append((chosen, float(mm)))
        leaves.append(tuple(layers))
    cavity_mm = st.number_input("Cavity between the leaves, mm (0 if one leaf)", min_value=0.0, max_value=2000.0,
                                value=old.cavity_mm, step=5.0, key="buildup-cavity")
    fill = st.selectbox("Cavity", list(FILLS), index=list(FILLS).index(old.fill) if old.fill in FILLS else 0,
                        format_func=FILLS.get, key="buildup-fill")
    studs = st.selectbox("Leaves joined by", list(STUDS),
                         index=list(STUDS).index(old.studs) if old.studs in STUDS else 0,
                         format_func=STUDS.get, key="buildup-studs")
    return BuildUp(tuple(leaf for leaf in leaves if leaf), cavity_mm, fill, studs)


def to_text(build_up: BuildUp) -> str:
    """The construction-file text of the form's values ("" when no layer is chosen)."""
    if not build_up.leaves:
        return ""
    lines = []
    for leaf in build_up.leaves:
        layers = ", ".join(json.dumps(f"{m}:{mm:g}") for m, mm in leaf)
        lines += ["[[leaf]]", f"layers = [{layers}]", ""]
    if len(build_up.leaves) == 2:
        lines += ["[cavity]", f"depth_mm = {build_up.cavity_mm:g}", f"fill = {json.dumps(build_up.fill)}",
                  f"studs = {json.dumps(build_up.studs)}", ""]
    return "\n".join(lines)


def chosen_text(stored: str, entered: BuildUp) -> str:
    """What to store: the form's text, or the stored text when it holds more than the form and the
    form was left as it was."""
    old = parse(stored)
    shown = tuple(leaf for leaf in (tuple((m, t) for m, t in leaf[:LAYERS_PER_LEAF] if m in MATERIALS)
                                    for leaf in old.leaves[:2]) if leaf)
    untouched = (entered.leaves, entered.cavity_mm, entered.fill, entered.studs) == (shown, old.cavity_mm,
                                                                                  old.fill, old.studs)
    if not old.fits_form and untouched:
        return stored
    return to_text(entered)
