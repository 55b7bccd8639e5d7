"""The built-in agent catalogue as data: properties, freezing-curve rows and packaging, each with its source.

Rows are typed in from the named tables (CRC Handbook, Melinder 2010 as fitted in CoolProp, ISO 22241,
phase-diagram papers); every value carries a tag (published, library, memory, practice, derived) in
the agent's ``sources``.  :mod:`courseplan.agents` merges user overrides into this table.
"""

from __future__ import annotations

import dataclasses

from courseplan.agents.record import Agent

# molar masses of the elements [g/mol], IUPAC 2013 conventional values [memory]
_N, _CL = 14.007, 35.453


# ---- helpers for typing in rows ----------------------------------------------------------------------
def _molal(rows: list[tuple[float, float]], molar_mass_g_mol: float) -> tuple[tuple[float, float], ...]:
    """Convert ``(molality [mol/kg], depression [K])`` rows to ``(mass fraction, T_f [°C])``."""
    out = []
    for b, dt in rows:
        mb = b * molar_mass_g_mol / 1000.0
        out.append((mb / (1.0 + mb), -dt))
    return tuple(out)


def _pct(rows: list[tuple[float, float]]) -> tuple[tuple[float, float], ...]:
    return tuple((p / 100.0, t) for p, t in rows)


_CRC_F = ("CRC Handbook 'Freezing point lowering by electrolytes in aqueous solution' "
          "(after Smithsonian Physical Tables, 9th ed., 1956)")


_CRC_H = "CRC Handbook 'Enthalpy of solution of electrolytes' (after Parker 1965, NSRDS-NBS 2)"


_MEL = "CoolProp 8.0 fit of Melinder (2010), IIR, evaluated once and typed in"


# CRC 'Freezing point lowering by electrolytes' rows, molality [mol/kg] → ΔT [K] [published]
_M_COLS = (0.05, 0.10, 0.25, 0.50, 0.75, 1.00, 1.50, 2.00, 2.50, 3.00)


CRC_MOLALITY_ROWS: dict[str, tuple[tuple[float, float], ...]] = {
    "CaCl2": tuple(zip(_M_COLS, (0.25, 0.49, 1.27, 2.66, 4.28, 6.35, 10.78, 15.27, 20.42, 28.08),
                       strict=False)),
    "KCl": tuple(zip(_M_COLS, (0.17, 0.35, 0.86, 1.68, 2.49, 3.29, 4.88, 6.50, 8.14, 9.77), strict=False)),
    "KNO3": tuple(zip(_M_COLS, (0.17, 0.33, 0.78, 1.47, 2.11, 2.66), strict=False)),
    "NH4Cl": tuple(zip(_M_COLS, (0.17, 0.34, 0.85, 1.70, 2.55), strict=False)),
    "NaCl": tuple(zip(_M_COLS, (0.18, 0.35, 0.85, 1.68, 2.60), strict=False)),
}
"""Rows of the CRC/Smithsonian molality table [published]; also the validation tests' reference."""


# CRC 'Concentrative properties' NaCl, mass % → T_f [°C] [published]
CRC_NACL_MASS_PCT_ROWS: tuple[tuple[float, float], ...] = (
    (0.5, -0.30), (1, -0.59), (2, -1.19), (3, -1.79), (4, -2.41), (5, -3.05), (6, -3.70), (7, -4.38),
    (8, -5.08), (9, -5.81), (10, -6.56), (12, -8.18), (14, -9.94), (16, -11.89), (18, -14.04),
    (20, -16.46),
)

# CRC 'Concentrative properties' NaCl near the eutectic, mass % → T_f [°C] [published]: CRC Handbook
# of Chemistry and Physics, 102nd ed. (2021), freezing-point depression column; Lange's Handbook 15th ed. Table 5.13 'Freezing point of sodium chloride brines' agrees within 0.02 K
# (-17.78, -19.19, -20.69; eutectic 23.3 % -21.1 °C).  Replaces the CoolProp/Melinder values
# (-17.744, -19.096, -20.515), which run 0.04-0.16 K warm here.
_CRC_NACL_HIGH = ((21, -17.78), (22, -19.18), (23, -20.67))
_MEL_CACL2 = ((2, -0.917), (4, -1.847), (6, -2.932), (8, -4.251), (10, -5.842), (12, -7.715),
              (14, -9.869), (16, -12.315), (18, -15.086), (20, -18.260), (22, -21.973), (24, -26.439),
              (26, -31.966), (27, -35.254), (28, -38.975), (29, -43.201), (29.5, -45.529))


_MEL_MGCL2 = ((1, -0.664), (2, -1.219), (4, -2.331), (6, -3.773), (8, -5.742), (10, -8.282),
              (12, -11.347), (14, -14.871), (16, -18.839), (18, -23.355), (20, -28.709), (21, -31.860))


def _builtin() -> dict[str, Agent]:
    a: list[Agent] = []
    p = "practice: usual trade packaging and grades, no published source"
    a.append(Agent(
        name="NaCl", label="rock salt (NaCl)", formula="NaCl", molar_mass_g_mol=58.443, ions=2,
        nitrogen_fraction=0.0, chloride_fraction=_CL / 58.443,
        eutectic_c=-21.12, eutectic_mass_fraction=0.2331, enthalpy_solution_kj_mol=3.88,
        purity=0.95, crystal_water_fraction=0.0, bulk_density_kg_m3=1200.0,
        bag_sizes_kg=(25.0,), big_bag_kg=1000.0, bags_per_pallet=40, oxidiser=False,
        curve_approximate=False, curve=_pct(list(CRC_NACL_MASS_PCT_ROWS) + list(_CRC_NACL_HIGH)),
        aliases=("rock salt", "road salt", "salt", "sodium chloride", "nacl", "halite"),
        note="cheap, slow to act on very wet snow; chloride load",
        sources={
            "molar_mass_g_mol": "published: IUPAC atomic weights",
            "eutectic_c": "published: Salt Institute property page (-21.12 °C, 23.31 %)",
            "eutectic_mass_fraction": "published: Salt Institute property page",
            "enthalpy_solution_kj_mol": f"published: {_CRC_H}",
            "curve": "published: CRC Handbook 'Concentrative properties of aqueous solutions' rows "
                     "0.5–23 % (102nd ed. for 21–23 %; Lange's Handbook 15th ed. Table 5.13 agrees "
                     "within 0.02 K); eutectic point from the Salt Institute",
            "purity": "practice: rock/road salt is sold at about 95 % NaCl or more",
            "crystal_water_fraction": "practice: dry salt assumed",
            "bulk_density_kg_m3": "memory: rock/road salt loose 1100–1300 kg/m³",
            "bag_sizes_kg": p, "big_bag_kg": p, "bags_per_pallet": p,
        }))
    a.append(Agent(
        name="NH4NO3", label="ammonium nitrate (NH4NO3)", formula="NH4NO3", molar_mass_g_mol=80.043,
        ions=2, nitrogen_fraction=2 * _N / 80.043, chloride_fraction=0.0,
        eutectic_c=-16.9, eutectic_mass_fraction=0.424, enthalpy_solution_kj_mol=25.69,
        purity=0.98, crystal_water_fraction=0.0, bulk_density_kg_m3=1000.0,
        bag_sizes_kg=(25.0,), big_bag_kg=500.0, bags_per_pallet=40, oxidiser=True,
        curve_approximate=True, curve=(),
        aliases=("an", "ammonium nitrate", "nh4no3", "nitrate"),
        note="strongly endothermic, fast; oxidiser and nitrogen load",
        sources={
            "molar_mass_g_mol": "published: IUPAC atomic weights",
            "eutectic_c": "memory: about -17 °C (design notes: ≈ -17 °C, 41–43 %)",
            "eutectic_mass_fraction": "memory: about 41–43 %",
            "enthalpy_solution_kj_mol": f"published: {_CRC_H}",
            "curve": "memory: no rows; dilute limit to the eutectic, osmotic coefficient interpolated "
                     "(approximate)",
            "purity": "memory: fertiliser/technical grades 98–99.5 % NH4NO3",
            "bulk_density_kg_m3": "published: bulk-cargo code entry UN 2071, 900–1200 kg/m³",
            "bag_sizes_kg": p, "big_bag_kg": p, "bags_per_pallet": p,
        }))
    a.append(Agent(
        name="urea", label="urea (CO(NH2)2)", formula="CO(NH2)2", molar_mass_g_mol=60.056, ions=1,
        nitrogen_fraction=2 * _N / 60.056, chloride_fraction=0.0,
        eutectic_c=-11.5, eutectic_mass_fraction=0.325, enthalpy_solution_kj_mol=15.1,
        purity=0.99, crystal_water_fraction=0.0, bulk_density_kg_m3=740.0,
        bag_sizes_kg=(25.0,), big_bag_kg=1000.0, bags_per_pallet=40, oxidiser=False,
        curve_approximate=True, curve=(),
        aliases=("urea", "carbamide", "co(nh2)2"),
        note="endothermic, weak freezing-point depression (non-electrolyte); nitrogen load",
        sources={
            "molar_mass_g_mol": "published: IUPAC atomic weights",
            "eutectic_c": "published: ISO 22241 (32.5 % urea solution is the eutectic, -11.5 °C)",
            "eutectic_mass_fraction": "published: ISO 22241",
            "enthalpy_solution_kj_mol": "memory: +15.1…+15.9 kJ/mol",
            "curve": "memory: no rows; ideal dilute limit to the eutectic, osmotic coefficient "
                     "interpolated (approximate)",
            "purity": "practice: technical/fertiliser urea about 99 %",
            "bulk_density_kg_m3": "memory: urea prills 700–780 kg/m³",
            "bag_sizes_kg": p, "big_bag_kg": p, "bags_per_pallet": p,
        }))
    cacl2_src_curve = (f"library: {_MEL} (INCOMP::MCA) rows 2–29.5 %; the Smithsonian molality rows "
                       "(CRC) lie 0.2–0.9 K colder at 0.5–3 mol/kg and are not used")
    a.append(Agent(
        name="CaCl2", label="calcium chloride, anhydrous (CaCl2)", formula="CaCl2",
        molar_mass_g_mol=110.98, ions=3, nitrogen_fraction=0.0, chloride_fraction=2 * _CL / 110.98,
        eutectic_c=-50.0, eutectic_mass_fraction=0.302, enthalpy_solution_kj_mol=-81.3,
        purity=0.94, crystal_water_fraction=0.0, bulk_density_kg_m3=950.0,
        bag_sizes_kg=(25.0,), big_bag_kg=1000.0, bags_per_pallet=40, oxidiser=False,
        curve_approximate=False, curve=_pct(list(_MEL_CACL2)),
        aliases=("calcium chloride", "cacl2 anhydrous", "cacl2", "calcium chloride pellets"),
        note="exothermic on dissolving: heat melts snow, little net cold; chloride load",
        sources={
            "molar_mass_g_mol": "published: IUPAC atomic weights",
            "eutectic_c": "published: phasediagram.dk CaCl2–H2O (≈ -50 °C)",
            "eutectic_mass_fraction": "published: phasediagram.dk CaCl2–H2O (≈ 30–31 %)",
            "enthalpy_solution_kj_mol": "memory: -81.3 kJ/mol, consistent with NBS tables "
                                        "(Wagman et al. 1982)",
            "curve": cacl2_src_curve,
            "purity": "practice: anhydrous pellets 94–97 % CaCl2",
            "bulk_density_kg_m3": "memory: about 900–1000 kg/m³",
            "bag_sizes_kg": p, "big_bag_kg": p, "bags_per_pallet": p,
        }))
    a.append(Agent(
        name="CaCl2.2H2O", label="calcium chloride flake (CaCl2·2H2O)", formula="CaCl2·2H2O",
        molar_mass_g_mol=110.98, ions=3, nitrogen_fraction=0.0, chloride_fraction=2 * _CL / 110.98,
        eutectic_c=-50.0, eutectic_mass_fraction=0.302, enthalpy_solution_kj_mol=-44.8,
        purity=0.77, crystal_water_fraction=0.23, bulk_density_kg_m3=850.0,
        bag_sizes_kg=(25.0,), big_bag_kg=1000.0, bags_per_pallet=40, oxidiser=False,
        curve_approximate=False, curve=_pct(list(_MEL_CACL2)), hydrate_molar_mass_g_mol=147.01,
        aliases=("calcium chloride flake", "flake", "cacl2 flake", "cacl2 dihydrate", "cacl2·2h2o",
                 "road flake"),
        note="exothermic; its crystal water joins the brine; chloride load",
        sources={
            "molar_mass_g_mol": "published: IUPAC atomic weights (anhydrous solute; dihydrate 147.01)",
            "eutectic_c": "published: phasediagram.dk CaCl2–H2O (same brine as anhydrous)",
            "eutectic_mass_fraction": "published: phasediagram.dk CaCl2–H2O",
            "enthalpy_solution_kj_mol": "memory: ≈ -44.8 kJ/mol of CaCl2·2H2O (derived from NBS "
                                        "formation enthalpies, unconfirmed)",
            "curve": cacl2_src_curve,
            "purity": "practice: flake sold as 77–80 % CaCl2",
            "crystal_water_fraction": "derived: 1 - purity (the rest is crystal water and moisture)",
            "bulk_density_kg_m3": "memory: CaCl2 flake 800–950 kg/m³",
            "bag_sizes_kg": p, "big_bag_kg": p, "bags_per_pallet": p,
        }))
    a.append(Agent(
        name="MgCl2", label="magnesium chloride, anhydrous (MgCl2)", formula="MgCl2",
        molar_mass_g_mol=95.211, ions=3, nitrogen_fraction=0.0, chloride_fraction=2 * _CL / 95.211,
        eutectic_c=-33.2, eutectic_mass_fraction=0.216, enthalpy_solution_kj_mol=-160.0,
        purity=0.95, crystal_water_fraction=0.0, bulk_density_kg_m3=800.0,
        bag_sizes_kg=(25.0,), big_bag_kg=1000.0, bags_per_pallet=40, oxidiser=False,
        curve_approximate=False, curve=_pct(list(_MEL_MGCL2)),
        aliases=("magnesium chloride", "mgcl2"),
        note="strongly exothermic on dissolving: heat melts snow; chloride load",
        sources={
            "molar_mass_g_mol": "published: IUPAC atomic weights",
            "eutectic_c": "published: J. Chinese Inst. Chem. Eng. 33(5) 2002, 469–475",
            "eutectic_mass_fraction": "published: J. Chinese Inst. Chem. Eng. 33(5) 2002, 469–475",
            "enthalpy_solution_kj_mol": "memory: ≈ -160 kJ/mol",
            "curve": f"library: {_MEL} (INCOMP::MMG) rows 1–21 %",
            "purity": "practice: assumed 95 %",
            "bulk_density_kg_m3": "memory: about 800 kg/m³",
            "bag_sizes_kg": p, "big_bag_kg": p, "bags_per_pallet": p,
        }))
    a.append(Agent(
        name="KCl", label="potassium chloride (KCl)", formula="KCl", molar_mass_g_mol=74.551, ions=2,
        nitrogen_fraction=0.0, chloride_fraction=_CL / 74.551,
        eutectic_c=-10.8, eutectic_mass_fraction=0.199, enthalpy_solution_kj_mol=17.22,
        purity=0.95, crystal_water_fraction=0.0, bulk_density_kg_m3=1050.0,
        bag_sizes_kg=(25.0,), big_bag_kg=1000.0, bags_per_pallet=40, oxidiser=False,
        curve_approximate=False, curve=_molal(list(CRC_MOLALITY_ROWS["KCl"]), 74.551),
        aliases=("potassium chloride", "kcl", "potash", "muriate of potash", "mop"),
        note="endothermic; limited reach (eutectic -10.8 °C); chloride load",
        sources={
            "molar_mass_g_mol": "published: IUPAC atomic weights",
            "eutectic_c": "published: Brady 2009 H2O–KCl phase diagram",
            "eutectic_mass_fraction": "published: Brady 2009 H2O–KCl phase diagram",
            "enthalpy_solution_kj_mol": "memory: +17.22 kJ/mol",
            "curve": f"published: {_CRC_F}, rows 0.05–3.0 mol/kg",
            "purity": "memory: muriate of potash about 95 % KCl",
            "bulk_density_kg_m3": "memory: about 1000–1100 kg/m³",
            "bag_sizes_kg": p, "big_bag_kg": p, "bags_per_pallet": p,
        }))
    a.append(Agent(
        name="(NH4)2SO4", label="ammonium sulfate ((NH4)2SO4)", formula="(NH4)2SO4",
        molar_mass_g_mol=132.14, ions=3, nitrogen_fraction=2 * _N / 132.14, chloride_fraction=0.0,
        eutectic_c=-19.35, eutectic_mass_fraction=0.40, enthalpy_solution_kj_mol=6.5,
        purity=0.99, crystal_water_fraction=0.0, bulk_density_kg_m3=1000.0,
        bag_sizes_kg=(25.0, 50.0), big_bag_kg=1000.0, bags_per_pallet=40, oxidiser=False,
        curve_approximate=True, curve=(),
        aliases=("ammonium sulfate", "ammonium sulphate", "as", "(nh4)2so4", "nh4so4"),
        note="mildly endothermic; nitrogen load; corrodes metal",
        sources={
            "molar_mass_g_mol": "published: IUPAC atomic weights",
            "eutectic_c": "published: J. Phys. Chem. B 102(38), 7462–7469 (1998)",
            "eutectic_mass_fraction": "published: same source, about 40 %",
            "enthalpy_solution_kj_mol": "derived: from ion formation enthalpies (≈ +6.5 kJ/mol)",
            "curve": "memory: no rows; dilute limit to the eutectic, osmotic coefficient interpolated "
                     "(approximate)",
            "purity": "practice: fertiliser grade about 99 %",
            "bulk_density_kg_m3": "memory: about 1000 kg/m³",
            "bag_sizes_kg": p, "big_bag_kg": p, "bags_per_pallet": p,
        }))
    a.append(Agent(
        name="NH4Cl", label="ammonium chloride (NH4Cl)", formula="NH4Cl", molar_mass_g_mol=53.491,
        ions=2, nitrogen_fraction=_N / 53.491, chloride_fraction=_CL / 53.491,
        eutectic_c=-15.4, eutectic_mass_fraction=0.197, enthalpy_solution_kj_mol=14.78,
        purity=0.99, crystal_water_fraction=0.0, bulk_density_kg_m3=750.0,
        bag_sizes_kg=(25.0,), big_bag_kg=1000.0, bags_per_pallet=40, oxidiser=False,
        curve_approximate=True, curve=_molal(list(CRC_MOLALITY_ROWS["NH4Cl"]), 53.491),
        aliases=("ammonium chloride", "nh4cl", "sal ammoniac"),
        note="endothermic; nitrogen and chloride load",
        sources={
            "molar_mass_g_mol": "published: IUPAC atomic weights",
            "eutectic_c": "published (secondary): encyclopedic cryohydrate table",
            "eutectic_mass_fraction": "published (secondary): encyclopedic cryohydrate table",
            "enthalpy_solution_kj_mol": f"published: {_CRC_H}",
            "curve": f"published: {_CRC_F}, rows 0.05–0.75 mol/kg; approximate from 0.75 mol/kg to "
                     "the eutectic",
            "purity": "practice: technical grade about 99 %",
            "bulk_density_kg_m3": "memory: about 700–800 kg/m³",
            "bag_sizes_kg": p, "big_bag_kg": p, "bags_per_pallet": p,
        }))
    a.append(Agent(
        name="KNO3", label="potassium nitrate (KNO3), reference curve", formula="KNO3",
        molar_mass_g_mol=101.10, ions=2, nitrogen_fraction=_N / 101.10, chloride_fraction=0.0,
        eutectic_c=-2.9, eutectic_mass_fraction=0.10, enthalpy_solution_kj_mol=34.89,
        purity=0.99, crystal_water_fraction=0.0, bulk_density_kg_m3=1100.0,
        bag_sizes_kg=(25.0,), big_bag_kg=1000.0, bags_per_pallet=40, oxidiser=True,
        curve_approximate=True, curve=_molal(list(CRC_MOLALITY_ROWS["KNO3"]), 101.10),
        aliases=("potassium nitrate", "kno3"), reference_only=True,
        note="kept to check curves against the CRC table; eutectic too warm for hardening",
        sources={
            "molar_mass_g_mol": "published: IUPAC atomic weights",
            "eutectic_c": "memory: about -2.9 °C",
            "eutectic_mass_fraction": "memory: about 10 %",
            "enthalpy_solution_kj_mol": "memory: +34.89 kJ/mol",
            "curve": f"published: {_CRC_F}, rows 0.05–1.0 mol/kg; approximate to the eutectic",
            "purity": "practice", "bulk_density_kg_m3": "memory",
            "bag_sizes_kg": p, "big_bag_kg": p, "bags_per_pallet": p,
        }))
    out = {}
    for ag in a:
        src = dict(ag.sources)
        for f in ("nitrogen_fraction", "chloride_fraction"):
            src.setdefault(f, "derived: from the formula and IUPAC atomic weights")
        src.setdefault("ions", "published: formula (strong electrolyte fully dissociated)")
        src.setdefault("oxidiser", "published: UN 1942 class 5.1" if ag.oxidiser else "derived: formula")
        src.setdefault("crystal_water_fraction", "practice: dry product assumed")
        out[ag.name] = dataclasses.replace(ag, sources=src)
    return out


_BUILTIN = _builtin()


def builtin_agents() -> dict[str, Agent]:
    """Return the built-in catalogue (a fresh dict; the agents are frozen)."""
    return dict(_BUILTIN)
