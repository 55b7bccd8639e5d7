"""The agent record: one frozen dataclass per hardening agent, every value with its source tag."""

from __future__ import annotations

import dataclasses
from collections.abc import Mapping
from dataclasses import dataclass, field
from typing import Any

CONFIDENCE = ("published", "library", "memory", "practice", "derived", "user")



@dataclass(frozen=True)
class Agent:
    """One hardening agent as sold: the dissolving salt and the product it comes in.

    Attributes
    ----------
    name
        Catalogue key, e.g. ``"NaCl"``.
    label
        Human label, e.g. ``"rock salt (NaCl)"``.
    formula
        Chemical formula of the product's salt.
    molar_mass_g_mol
        Molar mass of the anhydrous solute [g/mol] (the dissolved salt).
    ions
        Ions per formula unit, n (1 for a non-electrolyte such as urea).
    nitrogen_fraction, chloride_fraction
        Mass fractions of nitrogen and chloride in the anhydrous salt [-].
    eutectic_c, eutectic_mass_fraction
        Eutectic temperature [°C] and brine mass fraction of salt there [-].
    enthalpy_solution_kj_mol
        Enthalpy of solution per mole of salt dissolving from the product's solid form, at infinite
        dilution and 25 °C [kJ/mol]; positive absorbs heat.
    purity
        Mass fraction of anhydrous salt in the product [-].
    crystal_water_fraction
        Crystal water and moisture per kg of product that join the brine [kg/kg].
    bulk_density_kg_m3
        Loose bulk density of the product [kg/m³].
    bag_sizes_kg, big_bag_kg, bags_per_pallet
        Usual package sizes (smallest first) [kg], big-bag size [kg] and bags on a pallet.
    oxidiser
        True for oxidising agents (ammonium and potassium nitrate).
    curve_approximate
        True when the freezing curve between the tabulated rows (or between the dilute limit and
        the eutectic) is an approximation.
    curve
        Freezing-curve rows ``(mass fraction, T_f [°C])`` below the eutectic, ascending.  The
        eutectic is appended as the last knot; the dilute limit is T_f → −n·K_f·b.
    sources
        Attribute → ``"confidence: source"``.
    aliases
        Other names accepted by :func:`get_agent` (case-insensitive).
    hydrate_molar_mass_g_mol
        Molar mass of the hydrate as sold (None for anhydrous products) [g/mol].
    reference_only
        True for entries kept to check curves against tables (not a recommended agent).
    note
        One line on use.
    """

    name: str
    label: str
    formula: str
    molar_mass_g_mol: float
    ions: int
    nitrogen_fraction: float
    chloride_fraction: float
    eutectic_c: float
    eutectic_mass_fraction: float
    enthalpy_solution_kj_mol: float
    purity: float = 1.0
    crystal_water_fraction: float = 0.0
    bulk_density_kg_m3: float = 1000.0
    bag_sizes_kg: tuple[float, ...] = (25.0,)
    big_bag_kg: float = 1000.0
    bags_per_pallet: int = 40
    oxidiser: bool = False
    curve_approximate: bool = True
    curve: tuple[tuple[float, float], ...] = ()
    sources: Mapping[str, str] = field(default_factory=dict)
    aliases: tuple[str, ...] = ()
    hydrate_molar_mass_g_mol: float | None = None
    reference_only: bool = False
    note: str = ""

    # ---- derived quantities ------------------------------------------------------------------
    @property
    def solution_heat_j_kg(self) -> float:
        """Enthalpy of solution per kg of anhydrous salt [J/kg] (+ absorbs heat) [derived]."""
        return self.enthalpy_solution_kj_mol * 1e6 / self.molar_mass_g_mol

    @property
    def water_per_salt(self) -> float:
        """Crystal water and moisture brought into the brine per kg of salt [kg/kg] [derived]."""
        return self.crystal_water_fraction / self.purity

    @property
    def nitrogen_per_product(self) -> float:
        """Nitrogen per kg of product [kg/kg] [derived]."""
        return self.purity * self.nitrogen_fraction

    @property
    def chloride_per_product(self) -> float:
        """Chloride per kg of product [kg/kg] [derived]."""
        return self.purity * self.chloride_fraction

    def as_dict(self) -> dict[str, Any]:
        """Plain JSON-ready mapping of every attribute (curve rows as lists)."""
        d = dataclasses.asdict(self)
        d["sources"] = dict(self.sources)
        d["curve"] = [list(r) for r in self.curve]
        d["bag_sizes_kg"] = list(self.bag_sizes_kg)
        d["aliases"] = list(self.aliases)
        d["solution_heat_kj_kg"] = self.solution_heat_j_kg / 1e3
        return d



AGENT_FIELDS = tuple(f.name for f in dataclasses.fields(Agent))
