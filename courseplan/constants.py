"""Physical constants of water, ice and air, each with its unit, tag and citation.

Values are typed in with their source (the GPL-licensed ``iapws`` package is *not* a dependency).
Tags: [V] verified against the named source, [L] computed with a general-purpose library,
[M] from memory, [D] derived here.  Temperatures in °C inside the package; kelvin only where a
formula needs it (``T0_K``).

References
----------
.. [1] IAPWS R10-06 (2009), Revised Release on the Equation of State 2006 for H2O Ice Ih;
   Feistel, R. & Wagner, W. (2006). A new equation of state for H2O ice Ih.
   *J. Phys. Chem. Ref. Data* 35(2), 1021–1047. doi:10.1063/1.2183324
.. [2] IAPWS R6-95 (2018), Revised Release on the IAPWS-95 formulation; Wagner, W. & Pruß, A.
   (2002). *J. Phys. Chem. Ref. Data* 31(2), 387–535. doi:10.1063/1.1461829
.. [3] IAPWS R14-08 (2011), Revised Release on the Pressure along the Melting and Sublimation
   Curves of Ordinary Water Substance; Wagner, W., Riethmann, T., Feistel, R. & Harvey, A. H.
   (2011). *J. Phys. Chem. Ref. Data* 40, 043103. doi:10.1063/1.3657937
.. [4] CODATA 2018 recommended values (Tiesinga et al. 2021, *Rev. Mod. Phys.* 93, 025010);
   R and σ are exact in the 2019 SI.
"""

from __future__ import annotations

# --- SI-exact constants [V] CODATA 2018 [4] -------------------------------------------------------
R_GAS = 8.314462618
"""Molar gas constant [J/(mol·K)] (exact, 2019 SI) [V] [4]."""
SIGMA = 5.670374419e-8
"""Stefan–Boltzmann constant [W/(m²·K⁴)] (exact, 2019 SI) [V] [4]."""

# --- water substance ------------------------------------------------------------------------------
T0_K = 273.15
"""0 °C in kelvin [K] (definition)."""
T_TRIPLE_K = 273.16
"""Triple-point temperature of water [K] [V] IAPWS [2]."""
P_TRIPLE_PA = 611.657
"""Triple-point pressure of water [Pa] [V] IAPWS R14-08 [3]."""
T_CRIT_K = 647.096
"""Critical temperature of water [K] [V] IAPWS-95 [2]."""
P_CRIT_PA = 22.064e6
"""Critical pressure of water [Pa] [V] IAPWS-95 [2]."""
M_WATER_KG_MOL = 0.018015268
"""Molar mass of water [kg/mol] [V] IAPWS-95 [2]."""

L_FUSION = 333.4e3
"""Specific enthalpy of melting of ice Ih at 101.325 kPa [J/kg] [L] IAPWS-06 [1] (333.43 kJ/kg)."""
L_VAPOUR_0C = 2.5009e6
"""Specific enthalpy of vaporisation of water at 0 °C [J/kg] [L] IAPWS-95 [2] (2500.9 kJ/kg)."""
L_SUBLIMATION_0C = L_VAPOUR_0C + L_FUSION
"""Specific enthalpy of sublimation of ice at 0 °C [J/kg] [D] (≈ 2834 kJ/kg)."""

RHO_WATER = 999.84
"""Density of liquid water at 0 °C, 101.325 kPa [kg/m³] [L] IAPWS-95 [2]."""
CP_WATER = 4219.0
"""Isobaric specific heat of liquid water at 0 °C [J/(kg·K)] [L] IAPWS-95 [2]."""
RHO_ICE = 916.72
"""Density of ice Ih at 0 °C, 101.325 kPa [kg/m³] [L] IAPWS-06 [1]."""
CP_ICE_0C = 2096.7
"""Isobaric specific heat of ice Ih at 0 °C [J/(kg·K)] [L] IAPWS-06 [1]."""
CP_ICE_SLOPE = 7.35
"""Slope of the ice specific heat with temperature near 0 °C [J/(kg·K²)] [D] from IAPWS-06 [1]
values 2.097 (0 °C), 2.023 (−10 °C) and 1.950 (−20 °C) kJ/(kg·K)."""

K_CRYOSCOPIC = R_GAS * T0_K**2 / L_FUSION
"""Cryoscopic constant of water, K_f = R·T0²/L_f [K·kg/mol] [D] (1.8607; textbook 1.86)."""

# --- air ------------------------------------------------------------------------------------------
R_DRY_AIR = 287.05
"""Specific gas constant of dry air [J/(kg·K)] [M] (R / 28.9647 g/mol)."""
CP_AIR = 1005.0
"""Isobaric specific heat of dry air near 0 °C [J/(kg·K)] [M]."""
EPSILON_VAPOUR = M_WATER_KG_MOL / 0.0289647
"""Ratio of the molar masses of water and dry air [-] [D] (≈ 0.622)."""
P_STANDARD_PA = 101325.0
"""Standard atmosphere [Pa] (definition)."""

# --- derived helpers ------------------------------------------------------------------------------
MELT_KG_PER_WH = 3600.0 / L_FUSION
"""Ice melted by 1 Wh of energy [kg/Wh] [D] (0.0108 kg per W/m² for one hour)."""
