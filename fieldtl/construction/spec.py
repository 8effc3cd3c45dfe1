"""The declared construction: leaves of bonded layers, an optional cavity, and its TOML file.

Construction file (our own format; thicknesses in mm, materials by name from
:data:`fieldtl.construction.materials.MATERIALS` or from [[material]] tables in the file)::

    name = "2 x 12.5 mm gypsum board each side, independent frames, 75 mm cavity, mineral wool"
    area_m2 = 10.8                          # optional, carried into the output only

    [[material]]                            # optional: materials of your own (new names only)
    name = "block_brand_x"
    density_kg_m3 = 1350
    youngs_modulus_gpa = 6.0
    poisson_ratio = 0.2
    loss_factor = 0.012
    source = "manufacturer data sheet"      # optional

    [[leaf]]                                # one leaf: a single wall or floor of bonded layers
    layers = ["gypsum_board:12.5", "gypsum_board:12.5"]

    [[leaf]]                                # a second leaf makes a double wall: [cavity] required
    layers = ["gypsum_board:12.5", "gypsum_board:12.5"]

    [cavity]
    depth_mm = 75
    fill = "full"                           # "none" | "partial" | "full" (porous absorbent)
    studs = "independent"                   # "independent" | "timber" | "steel" | "none"
    stud_spacing_mm = 600                   # timber studs only; default 600

Each layer is "MATERIAL:THICKNESS_MM". Every problem raises InputError with one line naming the
file (or the layer text) and what is wrong. The reader does not judge whether a construction is
buildable or whether the materials suit it.
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from dataclasses import dataclass
from pathlib import Path
from typing import Any, Literal

from fieldtl import validate
from fieldtl.construction.materials import Material, bending_stiffness_nm, critical_frequency_hz, material_table
from fieldtl.errors import InputError
from fieldtl.tomlfile import read_toml_file
from fieldtl.validate import (AREA_M2, CAVITY_MM, DENSITY_KG_M3, LAYER_MM, LOSS_FACTOR, POISSON_RATIO,
                              STUD_SPACING_MM, YOUNGS_MODULUS_GPA, check_keys, echo, file_label)

Fill = Literal["none", "partial", "full"]
Studs = Literal["independent", "timber", "steel", "none"]
FILLS: tuple[str, ...] = ("none", "partial", "full")
STUDS: tuple[str, ...] = ("independent", "timber", "steel", "none")
DEFAULT_STUD_SPACING_MM = 600.0  # common stud/joist centres (common practice)

_TOP_KEYS = {"name", "area_m2", "material", "leaf", "cavity"}
_MATERIAL_KEYS = {"name", "density_kg_m3", "youngs_modulus_gpa", "poisson_ratio", "loss_factor", "source"}
_LEAF_KEYS = {"layers"}
_CAVITY_KEYS = {"depth_mm", "fill", "studs", "stud_spacing_mm"}
MAX_LAYERS = 20          # bonded layers of one leaf
MAX_MATERIALS = 50       # [[material]] tables in one file


@dataclass(frozen=True, slots=True)
class Layer:
    material: Material
    thickness_mm: float

    def __post_init__(self) -> None:
        validate.number(self.thickness_mm, f"layer {self.material.name}: thickness", low=LAYER_MM[0],
                        high=LAYER_MM[1], unit=" mm")

    @property
    def surface_mass_kg_m2(self) -> float:
        return self.material.density_kg_m3 * self.thickness_mm / 1000.0


@dataclass(frozen=True, slots=True)
class Leaf:
    """One or more layers bonded together that bend as one panel.

    Simplification (stated, common practice for screwed or glued board layers): masses add and
    bending stiffnesses add, B = Σ B_i, as if each layer bent about its own neutral axis with no
    shear connection. This is the lower bound of the stiffness; two equal boards then keep the fc
    of one board. The loss factor is the mass-weighted mean of the layers'.
    """

    layers: tuple[Layer, ...]

    def __post_init__(self) -> None:
        if not 1 <= len(self.layers) <= MAX_LAYERS:
            raise InputError(f"leaf: needs 1 to {MAX_LAYERS} layers, got {len(self.layers)}")

    @property
    def surface_mass_kg_m2(self) -> float:
        return sum(layer.surface_mass_kg_m2 for layer in self.layers)

    @property
    def bending_stiffness_nm(self) -> float:
        return sum(bending_stiffness_nm(layer.material, layer.thickness_mm / 1000.0) for layer in self.layers)

    @property
    def loss_factor(self) -> float:
        return sum(layer.surface_mass_kg_m2 * layer.material.loss_factor for layer in self.layers) \
            / self.surface_mass_kg_m2

    @property
    def critical_frequency_hz(self) -> float:
        return critical_frequency_hz(self.surface_mass_kg_m2, self.bending_stiffness_nm)

    def describe(self) -> str:
        return " + ".join(f"{layer.material.name}:{layer.thickness_mm:g}" for layer in self.layers)


@dataclass(frozen=True, slots=True)
class Cavity:
    depth_mm: float
    fill: Fill
    studs: Studs
    stud_spacing_mm: float = DEFAULT_STUD_SPACING_MM

    def __post_init__(self) -> None:
        validate.choice(self.fill, FILLS, "cavity: fill")
        validate.choice(self.studs, STUDS, "cavity: studs")
        validate.number(self.depth_mm, "cavity: depth_mm", low=CAVITY_MM[0], high=CAVITY_MM[1], unit=" mm")
        validate.number(self.stud_spacing_mm, "cavity: stud_spacing_mm", low=STUD_SPACING_MM[0],
                        high=STUD_SPACING_MM[1], unit=" mm")


@dataclass(frozen=True, slots=True)
class Construction:
    """A single leaf (``cavity`` None) or two leaves and the cavity between them."""

    name: str
    leaves: tuple[Leaf, ...]
    cavity: Cavity | None = None
    area_m2: float | None = None

    def __post_init__(self) -> None:
        validate.text(self.name, "construction name", max_chars=validate.NOTE_CHARS)
        if len(self.leaves) not in (1, 2):
            raise InputError(f"construction {echo(self.name)}: one or two leaves, got {len(self.leaves)}")
        if (len(self.leaves) == 2) != (self.cavity is not None):
            raise InputError(f"construction {echo(self.name)}: a cavity goes with two leaves, and only with two")
        if self.area_m2 is not None:
            validate.number(self.area_m2, "construction: area_m2", low=AREA_M2[0], high=AREA_M2[1], unit=" m2")


def parse_layer(text: str, materials: Mapping[str, Material]) -> Layer:
    """"MATERIAL:THICKNESS_MM" → Layer; InputError naming the text if it is not that."""
    validate.text(text, "layer", max_chars=validate.NAME_CHARS)
    name, sep, thickness = text.partition(":")
    name = name.strip()
    if not sep:
        raise InputError(f"layer {echo(text)}: expected MATERIAL:THICKNESS_MM, e.g. \"gypsum_board:12.5\"")
    if name not in materials:
        known = ", ".join(sorted(materials))
        raise InputError(f"layer {echo(text)}: unknown material {echo(name)} (known: {validate.clean(known, 300)})")
    try:
        thickness_mm = float(thickness)
    except ValueError:
        raise InputError(f"layer {echo(text)}: thickness {echo(thickness.strip())} is not a number of mm") from None
    validate.number(thickness_mm, f"layer {echo(text)}: thickness", low=LAYER_MM[0], high=LAYER_MM[1], unit=" mm")
    return Layer(materials[name], thickness_mm)


def construction_from_layers(layers: Sequence[str], *, name: str | None = None, area_m2: float | None = None,
                             extra_materials: Mapping[str, Material] | None = None) -> Construction:
    """A single leaf of bonded layers from texts like ["concrete_dense:100", "plaster_gypsum:13"]."""
    if not layers:
        raise InputError("construction: give at least one layer as MATERIAL:THICKNESS_MM")
    if len(layers) > MAX_LAYERS:
        raise InputError(f"construction: {len(layers)} layers; at most {MAX_LAYERS}")
    materials = material_table(extra_materials)
    leaf = Leaf(tuple(parse_layer(text, materials) for text in layers))
    return Construction(name or leaf.describe(), (leaf,), None, area_m2)


def load_construction(path: str | Path) -> Construction:
    """Read and validate a construction file (format in the module docstring)."""
    return construction_from_dict(read_toml_file(path, what="construction file"), source_name=file_label(path))


def construction_from_dict(data: Mapping[str, Any], *, source_name: str) -> Construction:
    """Validate parsed construction data (from TOML or the app) into a Construction."""
    check_keys(data, _TOP_KEYS, "the top level", source_name)
    materials = material_table(_own_materials(data.get("material", []), source_name))
    leaves_data = data.get("leaf")
    if not isinstance(leaves_data, list) or len(leaves_data) not in (1, 2):
        raise InputError(f"{source_name}: needs one or two [[leaf]] tables")
    leaves = tuple(_leaf(entry, i + 1, materials, source_name) for i, entry in enumerate(leaves_data))
    cavity_data = data.get("cavity")
    if len(leaves) == 2 and cavity_data is None:
        raise InputError(f"{source_name}: two leaves need a [cavity] table (depth_mm, fill, studs)")
    if len(leaves) == 1 and cavity_data is not None:
        raise InputError(f"{source_name}: [cavity] needs a second [[leaf]]")
    cavity = None if cavity_data is None else _cavity(cavity_data, source_name)
    area_m2 = validate.optional_number(data, "area_m2", f"{source_name}:", low=AREA_M2[0], high=AREA_M2[1],
                                       unit=" m2")
    title = validate.text(data.get("name", ""), f"{source_name}: name", max_chars=validate.NOTE_CHARS)
    return Construction(title or " | ".join(leaf.describe() for leaf in leaves), leaves, cavity, area_m2)


def _own_materials(entries: Any, source_name: str) -> dict[str, Material]:
    if not isinstance(entries, list):
        raise InputError(f"{source_name}: [[material]] must be an array of tables")
    if len(entries) > MAX_MATERIALS:
        raise InputError(f"{source_name}: {len(entries)} [[material]] tables; at most {MAX_MATERIALS}")
    own: dict[str, Material] = {}
    for i, entry in enumerate(entries, start=1):
        where = f"[[material]] {i}"
        if not isinstance(entry, dict):
            raise InputError(f"{source_name}: {where} must be a table")
        check_keys(entry, _MATERIAL_KEYS, where, source_name)
        name = entry.get("name")
        if not isinstance(name, str) or not name.strip() or ":" in name:
            raise InputError(f"{source_name}: {where} needs a name without ':'")
        validate.text(name, f"{source_name}: {where} name", max_chars=validate.NAME_CHARS)
        if name in own:
            raise InputError(f"{source_name}: {where}: material {echo(name)} is defined twice")
        numbers = {key: validate.required_number(entry, key, f"{source_name}: {where}", low=low, high=high,
                                                 low_open=key == "loss_factor", high_open=high_open)
                   for key, (low, high), high_open in (("density_kg_m3", DENSITY_KG_M3, False),
                                                       ("youngs_modulus_gpa", YOUNGS_MODULUS_GPA, False),
                                                       ("poisson_ratio", POISSON_RATIO, True),
                                                       ("loss_factor", LOSS_FACTOR, True))}
        source = validate.text(entry.get("source", f"from {source_name}"), f"{source_name}: {where} source",
                               max_chars=validate.NOTE_CHARS)
        try:
            own[name] = Material(name, numbers["density_kg_m3"], numbers["youngs_modulus_gpa"] * 1e9,
                                 numbers["poisson_ratio"], numbers["loss_factor"], source)
        except InputError as exc:
            raise InputError(f"{source_name}: {where}: {exc}") from None
    try:
        material_table(own)
    except InputError as exc:
        raise InputError(f"{source_name}: {exc}") from None
    return own


def _leaf(entry: Any, number: int, materials: Mapping[str, Material], source_name: str) -> Leaf:
    where = f"[[leaf]] {number}"
    if not isinstance(entry, dict):
        raise InputError(f"{source_name}: {where} must be a table")
    check_keys(entry, _LEAF_KEYS, where, source_name)
    layers = entry.get("layers")
    if not isinstance(layers, list) or not layers:
        raise InputError(f"{source_name}: {where} needs layers = [\"MATERIAL:THICKNESS_MM\", ...]")
    if len(layers) > MAX_LAYERS:
        raise InputError(f"{source_name}: {where}: {len(layers)} layers; at most {MAX_LAYERS}")
    try:
        return Leaf(tuple(parse_layer(text, materials) for text in layers))
    except InputError as exc:
        raise InputError(f"{source_name}: {where}: {exc}") from None


def _cavity(entry: Any, source_name: str) -> Cavity:
    if not isinstance(entry, dict):
        raise InputError(f"{source_name}: [cavity] must be a table")
    check_keys(entry, _CAVITY_KEYS, "[cavity]", source_name)
    where = f"{source_name}: [cavity]"
    depth_mm = validate.required_number(entry, "depth_mm", where, low=CAVITY_MM[0], high=CAVITY_MM[1], unit=" mm")
    fill = validate.choice(entry.get("fill", "none"), FILLS, f"{where} fill")
    studs = validate.choice(entry.get("studs"), STUDS, f"{where} studs")
    if "stud_spacing_mm" in entry and studs != "timber":
        raise InputError(f"{where} stud_spacing_mm applies to timber studs only")
    spacing_mm = validate.optional_number(entry, "stud_spacing_mm", where, low=STUD_SPACING_MM[0],
                                          high=STUD_SPACING_MM[1], unit=" mm")
    return Cavity(depth_mm, fill, studs, DEFAULT_STUD_SPACING_MM if spacing_mm is None else spacing_mm)
