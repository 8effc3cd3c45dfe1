"""Building materials for the panel model: density, Young's modulus, Poisson ratio, loss factor.

Every row carries a short ``source`` for its reader ("typical values" for the built-in rows); where
the numbers come from is in the comment beside each row. Rows marked "facts sheet 10" take density,
E and ν from the table in section 10 of the project's facts sheet (/work/shared/reference/standards.md),
itself marked "typical values, from memory"; everything else is a typical value from memory.
Real products vary by ±20 % or more: a manufacturer's data sheet beats this table, and a
construction file can add its own rows ([[material]] tables, see :mod:`fieldtl.construction.spec`).

The loss factor is the internal (material) loss factor of the panel as installed. The prediction
adds the edge losses of heavy elements separately (:func:`fieldtl.construction.predict.total_loss_factor`).

Pure data and two formulas: no I/O, no judgement of whether a material suits a use.
"""

from __future__ import annotations

import math
from collections.abc import Mapping
from dataclasses import dataclass
from types import MappingProxyType

from fieldtl import validate
from fieldtl.errors import InputError
from fieldtl.validate import DENSITY_KG_M3, LOSS_FACTOR, POISSON_RATIO, YOUNGS_MODULUS_GPA

SPEED_OF_SOUND_M_S = 343.0  # in air at about 20 °C (common textbook value, from memory)


@dataclass(frozen=True, slots=True)
class Material:
    """An isotropic, homogeneous plate material (orthotropic boards are given one effective E)."""

    name: str
    density_kg_m3: float
    youngs_modulus_pa: float
    poisson_ratio: float
    loss_factor: float
    source: str

    def __post_init__(self) -> None:
        what = f"material {validate.echo(self.name)}:"
        validate.text(self.name, "material name", empty=False)
        validate.number(self.density_kg_m3, f"{what} density_kg_m3", low=DENSITY_KG_M3[0], high=DENSITY_KG_M3[1])
        validate.number(self.youngs_modulus_pa, f"{what} youngs_modulus_pa", low=YOUNGS_MODULUS_GPA[0] * 1e9,
                        high=YOUNGS_MODULUS_GPA[1] * 1e9)
        validate.number(self.poisson_ratio, f"{what} poisson_ratio", low=POISSON_RATIO[0], high=POISSON_RATIO[1],
                        high_open=True)
        validate.number(self.loss_factor, f"{what} loss_factor", low=LOSS_FACTOR[0], high=LOSS_FACTOR[1],
                        low_open=True, high_open=True)


# Every built-in row's numbers are typical values, from memory; the rows marked "facts sheet 10" beside
# them take rho, E and nu from that table (itself typical values, from memory). A row's ``source`` is
# written for its reader, without these notes.
_TYPICAL = "typical values"


def _row(name: str, density_kg_m3: float, youngs_modulus_gpa: float, poisson_ratio: float, loss_factor: float,
         source: str = _TYPICAL) -> tuple[str, Material]:
    return name, Material(name, density_kg_m3, youngs_modulus_gpa * 1e9, poisson_ratio, loss_factor, source)


# name, density kg/m3, E GPa, Poisson ratio, internal loss factor, source
MATERIALS: Mapping[str, Material] = MappingProxyType(dict((
    _row("concrete_dense", 2300, 30.0, 0.20, 0.006),              # rho, E, nu: facts sheet 10 table
    _row("concrete_block_dense", 2000, 20.0, 0.20, 0.010),        # dense aggregate blocks, mortar joints
    _row("concrete_block_lightweight", 1400, 8.0, 0.20, 0.010),   # lightweight aggregate blocks
    _row("aircrete", 600, 1.8, 0.20, 0.010),                      # autoclaved aerated concrete blocks
    _row("brick_clay_solid", 1900, 16.0, 0.15, 0.010),            # rho, E, nu: facts sheet 10 table
    _row("calcium_silicate", 1900, 13.0, 0.20, 0.010),
    _row("screed_cement", 2000, 20.0, 0.20, 0.010),
    _row("render_cement", 1900, 10.0, 0.20, 0.010),               # sand/cement render
    _row("plaster_gypsum", 1000, 5.0, 0.25, 0.010),               # wet gypsum plaster
    # E, nu: facts sheet 10 table (which gives 750 kg/m3); 720 kg/m3 is 9 kg/m2 at 12.5 mm, typical (from memory)
    _row("gypsum_board", 720, 2.5, 0.30, 0.015),
    _row("gypsum_board_dense", 860, 3.0, 0.30, 0.015),            # "sound" boards, about 13 kg/m2 at 15 mm
    _row("plywood", 600, 8.0, 0.30, 0.020),                       # orthotropic: one effective E
    _row("osb", 650, 5.0, 0.30, 0.015),
    _row("chipboard", 700, 3.5, 0.30, 0.015),                     # rho, E, nu: facts sheet 10 table
    _row("timber_floorboard", 500, 10.0, 0.30, 0.020),            # softwood along the grain; jointed boards
    _row("glass_float", 2500, 70.0, 0.22, 0.030),   # rho, E, nu: facts sheet 10 table; loss factor: a pane in gaskets
    _row("steel", 7850, 210.0, 0.30, 0.001),        # rho, E, nu: facts sheet 10 table; loss factor: a fixed sheet
    _row("aluminium", 2700, 70.0, 0.33, 0.001),     # rho, E, nu: facts sheet 10 table; loss factor: a fixed sheet
)))


def bending_stiffness_nm(material: Material, thickness_m: float) -> float:
    """B = E h^3 / (12 (1 - ν^2)) of a thin plate, in N·m (facts sheet 10)."""
    return material.youngs_modulus_pa * thickness_m ** 3 / (12.0 * (1.0 - material.poisson_ratio ** 2))


def critical_frequency_hz(surface_mass_kg_m2: float, bending_stiffness: float, *,
                          speed_of_sound_m_s: float = SPEED_OF_SOUND_M_S) -> float:
    """Coincidence frequency fc = (c^2 / 2π) sqrt(m'' / B) (facts sheet 10).

    Thin-plate bending theory: shear and rotary inertia of thick walls are not included.
    """
    return speed_of_sound_m_s ** 2 / (2.0 * math.pi) * math.sqrt(surface_mass_kg_m2 / bending_stiffness)


def material_table(extra: Mapping[str, Material] | None = None) -> Mapping[str, Material]:
    """The built-in table, plus ``extra`` rows; an extra row may not reuse a built-in name."""
    if not extra:
        return MATERIALS
    clash = sorted(set(extra) & set(MATERIALS))
    if clash:
        raise InputError(f"material {clash[0]!r} is a built-in material; give your own material another name")
    return MappingProxyType({**MATERIALS, **extra})
