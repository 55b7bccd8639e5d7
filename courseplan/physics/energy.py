"""Part B of the dosing model: energy income of a melting snow surface, vectorised.

Point energy balance of a snow surface held at 0 °C (it is wet), per unit area [W/m²]::

    Q = (1 − α)·K↓·f_cloud(N) + ε_a σ T_a⁴ − σ T_0⁴ + H + LE                          (B1)

- shortwave K↓ on the slope from the sun/shade raster (clear sky), reduced by cloud after Kasten &
  Czeplak (1980) [1]_: f = 1 − 0.75·N^3.4;
- incoming longwave with the clear-sky emissivity of Brutsaert (1975) [2]_,
  ε_cs = 1.24·(e_a / T_a)^(1/7) (e_a in hPa, T_a in K), raised for cloud by (1 + 0.22·N²)
  (Bolz 1949, as used by Brutsaert 1982 [3]_), capped at 1;
- outgoing longwave of a 0 °C surface with emissivity 1 (315.6 W/m²);
- sensible and latent heat by bulk transfer, H = ρ_a c_p C_H u (T_a − T_0),
  LE = ρ_a L_v C_E u (q_a − q_0) (condensation, LE > 0, when e_a exceeds 611 Pa), neutral
  stability, C_H = C_E = 1.5·10⁻³ [memory; published values for snow are 1–2·10⁻³].

The window's energy income is the *peak of the cumulative* net energy over the hourly steps,
floored at zero (Eq. B2): energy gained after a cooling hour is offset by it, and a longer window
can never lower it.  A temperature-index alternative after Hock (1999) [4]_ is given for plans with
only an air temperature.

Saturation vapour pressure: over water by the IAPWS auxiliary equation of Wagner & Pruß (1993,
2002) [5]_, over ice by IAPWS R14-08 (Wagner et al. 2011) [6]_.

References
----------
.. [1] Kasten, F. & Czeplak, G. (1980). Solar and terrestrial radiation dependent on the amount and
   type of cloud. *Solar Energy* 24(2), 177–189. doi:10.1016/0038-092X(80)90391-6
.. [2] Brutsaert, W. (1975). On a derivable formula for long-wave radiation from clear skies.
   *Water Resour. Res.* 11(5), 742–744. doi:10.1029/WR011i005p00742
.. [3] Brutsaert, W. (1982). *Evaporation into the Atmosphere*. Reidel, Dordrecht.
   doi:10.1007/978-94-017-1497-6
.. [4] Hock, R. (1999). A distributed temperature-index ice- and snowmelt model including potential
   direct solar radiation. *J. Glaciol.* 45(149), 101–111. doi:10.3189/S0022143000003087
.. [5] Wagner, W. & Pruß, A. (2002). The IAPWS formulation 1995 for the thermodynamic properties of
   ordinary water substance. *J. Phys. Chem. Ref. Data* 31(2), 387–535. doi:10.1063/1.1461829
.. [6] Wagner, W., Riethmann, T., Feistel, R. & Harvey, A. H. (2011). New equations for the
   sublimation pressure and melting pressure of H2O ice Ih. *J. Phys. Chem. Ref. Data* 40, 043103.
   doi:10.1063/1.3657937
"""

from __future__ import annotations

import numpy as np

from courseplan.constants import (
    CP_AIR,
    EPSILON_VAPOUR,
    L_VAPOUR_0C,
    P_CRIT_PA,
    P_TRIPLE_PA,
    R_DRY_AIR,
    SIGMA,
    T0_K,
    T_CRIT_K,
    T_TRIPLE_K,
)

__all__ = [
    "BRUTSAERT_A", "BRUTSAERT_EXP", "CLOUD_LW_K", "KC_A", "KC_B", "TRANSFER_COEFF",
    "clear_sky_emissivity", "cloud_shortwave_factor", "energy_income_j_m2", "hock_melt_kg_m2",
    "incoming_longwave_w_m2", "latent_heat_w_m2", "net_flux_w_m2", "outgoing_longwave_w_m2",
    "saturation_vapour_pressure_pa", "sensible_heat_w_m2", "vapour_pressure_pa", "weather_flux_w_m2",
]

KC_A, KC_B = 0.75, 3.4
"""Kasten & Czeplak (1980) cloud reduction of global radiation, 1 − A·N^B [memory for the values]."""
BRUTSAERT_A, BRUTSAERT_EXP = 1.24, 1.0 / 7.0
"""Brutsaert (1975) clear-sky emissivity ε = A·(e_a[hPa]/T_a[K])^EXP [memory for the form]."""
CLOUD_LW_K = 0.22
"""Cloud factor of incoming longwave, (1 + k·N²) (Bolz 1949, after Brutsaert 1982) [memory]."""
TRANSFER_COEFF = 1.5e-3
"""Bulk transfer coefficient for heat and vapour at 2 m over snow, neutral [memory: 1–2·10⁻³]."""
SURFACE_EMISSIVITY = 1.0
"""Longwave emissivity of the wet snow surface (design value 1, domain-data §8) [derived]."""
E_SURFACE_PA = 611.15
"""Vapour pressure over a 0 °C ice/water surface [Pa] [derived: IAPWS R14-08 at 273.15 K]."""

# Wagner & Pruß saturation-pressure coefficients [published: IAPWS-95 auxiliary equation]
_WP = (-7.85951783, 1.84408259, -11.7866497, 22.6807411, -15.9618719, 1.80122502)
# IAPWS R14-08 sublimation-pressure coefficients [published]
_SUB_A = (-0.212144006e2, 0.273203819e2, -0.610598130e1)
_SUB_B = (0.333333333e-2, 0.120666667e1, 0.170333333e1)


def _out(x):
    x = np.asarray(x)
    return float(x) if x.ndim == 0 else x


def saturation_vapour_pressure_pa(temperature_c, over: str = "water"):
    """Saturation vapour pressure [Pa] over liquid water or ice.

    Parameters
    ----------
    temperature_c
        Temperature [°C].
    over
        ``"water"`` (Wagner & Pruß 2002; supercooled below 0 °C, the WMO convention for relative
        humidity) or ``"ice"`` (IAPWS R14-08, valid below the triple point).
    """
    t = np.asarray(temperature_c, dtype=float) + T0_K
    if over == "water":
        tau = 1.0 - t / T_CRIT_K
        a1, a2, a3, a4, a5, a6 = _WP
        s = a1 * tau + a2 * tau**1.5 + a3 * tau**3 + a4 * tau**3.5 + a5 * tau**4 + a6 * tau**7.5
        return _out(P_CRIT_PA * np.exp(T_CRIT_K / t * s))
    if over == "ice":
        th = t / T_TRIPLE_K
        s = sum(a * th**b for a, b in zip(_SUB_A, _SUB_B, strict=True))
        return _out(P_TRIPLE_PA * np.exp(s / th))
    raise ValueError(f"over must be 'water' or 'ice', got {over!r}")


def vapour_pressure_pa(air_temp_c, rh_pct):
    """Vapour pressure of the air [Pa] from temperature [°C] and relative humidity [%] over water."""
    return _out(np.asarray(rh_pct, dtype=float) / 100.0 * saturation_vapour_pressure_pa(air_temp_c))


def cloud_shortwave_factor(cloud_fraction):
    """Kasten & Czeplak (1980) ratio of cloudy to clear-sky global radiation, 1 − 0.75·N^3.4 [-]."""
    n = np.clip(np.asarray(cloud_fraction, dtype=float), 0.0, 1.0)
    return _out(1.0 - KC_A * n**KC_B)


def clear_sky_emissivity(air_temp_c, vapour_pa):
    """Brutsaert (1975) clear-sky atmospheric emissivity 1.24·(e_a/T_a)^(1/7) [-], e_a in hPa."""
    t = np.asarray(air_temp_c, dtype=float) + T0_K
    e = np.asarray(vapour_pa, dtype=float) / 100.0
    return _out(BRUTSAERT_A * (e / t) ** BRUTSAERT_EXP)


def incoming_longwave_w_m2(air_temp_c, vapour_pa, cloud_fraction):
    """Incoming longwave radiation ε_a·σ·T_a⁴ with the cloud factor (1 + 0.22·N²), ε_a ≤ 1 [W/m²]."""
    n = np.clip(np.asarray(cloud_fraction, dtype=float), 0.0, 1.0)
    eps_cs = np.asarray(clear_sky_emissivity(air_temp_c, vapour_pa))
    eps = np.minimum(eps_cs * (1.0 + CLOUD_LW_K * n * n), 1.0)
    t = np.asarray(air_temp_c, dtype=float) + T0_K
    return _out(eps * SIGMA * t**4)


def outgoing_longwave_w_m2(surface_temp_c=0.0):
    """Longwave emitted by the snow surface ε_s·σ·T_s⁴ [W/m²] (315.6 W/m² at 0 °C, ε_s = 1)."""
    t = np.asarray(surface_temp_c, dtype=float) + T0_K
    return _out(SURFACE_EMISSIVITY * SIGMA * t**4)


def _air_density(air_temp_c, pressure_pa):
    return np.asarray(pressure_pa, dtype=float) / (R_DRY_AIR * (np.asarray(air_temp_c, dtype=float) + T0_K))


def sensible_heat_w_m2(air_temp_c, wind_m_s, pressure_pa=85000.0, transfer_coeff=TRANSFER_COEFF):
    """Bulk sensible heat flux to a 0 °C surface, ρ_a c_p C_H u (T_a − 0) [W/m²] (+ into the snow)."""
    ta = np.asarray(air_temp_c, dtype=float)
    u = np.asarray(wind_m_s, dtype=float)
    return _out(_air_density(ta, pressure_pa) * CP_AIR * transfer_coeff * u * ta)


def latent_heat_w_m2(air_temp_c, rh_pct, wind_m_s, pressure_pa=85000.0, transfer_coeff=TRANSFER_COEFF):
    """Bulk latent heat flux to a 0 °C wet surface, ρ_a L_v C_E u (q_a − q_0) [W/m²].

    Positive (condensation, heat into the snow) when the air's vapour pressure exceeds 611 Pa.
    """
    ta = np.asarray(air_temp_c, dtype=float)
    p = np.asarray(pressure_pa, dtype=float)
    ea = np.asarray(vapour_pressure_pa(ta, rh_pct))
    dq = EPSILON_VAPOUR * (ea - E_SURFACE_PA) / p
    return _out(_air_density(ta, p) * L_VAPOUR_0C * transfer_coeff * np.asarray(wind_m_s, dtype=float) * dq)


def weather_flux_w_m2(air_temp_c, rh_pct, wind_m_s, cloud_fraction, pressure_pa=85000.0,
                      transfer_coeff=TRANSFER_COEFF):
    """Compute the weather-only part of (B1): longwave in − out + sensible + latent [W/m²].

    Does not depend on the zone, so it is computed once per forecast step and sample.
    """
    ea = vapour_pressure_pa(air_temp_c, rh_pct)
    return _out(np.asarray(incoming_longwave_w_m2(air_temp_c, ea, cloud_fraction))
                - outgoing_longwave_w_m2(0.0)
                + sensible_heat_w_m2(air_temp_c, wind_m_s, pressure_pa, transfer_coeff)
                + latent_heat_w_m2(air_temp_c, rh_pct, wind_m_s, pressure_pa, transfer_coeff))


def net_flux_w_m2(shortwave_w_m2, air_temp_c, rh_pct, wind_m_s, cloud_fraction, albedo=0.6,
                  pressure_pa=85000.0, transfer_coeff=TRANSFER_COEFF):
    """Net energy flux into a 0 °C snow surface, Eq. (B1) [W/m²].

    Parameters
    ----------
    shortwave_w_m2
        Clear-sky shortwave on the (sloping) surface [W/m²].
    air_temp_c, rh_pct, wind_m_s, cloud_fraction
        Air temperature [°C] and relative humidity [%] at 2 m, wind [m/s], cloud cover [0–1].
    albedo
        Shortwave albedo of the wet snow [-].
    pressure_pa
        Air pressure [Pa].
    """
    sw = (1.0 - np.asarray(albedo, dtype=float)) * np.asarray(shortwave_w_m2, dtype=float) \
        * cloud_shortwave_factor(cloud_fraction)
    wx = weather_flux_w_m2(air_temp_c, rh_pct, wind_m_s, cloud_fraction, pressure_pa, transfer_coeff)
    return _out(sw + wx)


def energy_income_j_m2(step_energy_j_m2, axis: int = -1):
    """Energy income over a window from the net energy of its steps [J/m²], Eq. (B2).

    ``E_in = max(0, max_k Σ_{j ≤ k} E_j)``: the peak of the cumulative net energy, floored at zero.

    Parameters
    ----------
    step_energy_j_m2
        Net energy of each step [J/m²] along ``axis`` (in time order).
    """
    cum = np.cumsum(np.asarray(step_energy_j_m2, dtype=float), axis=axis)
    return _out(np.maximum(np.max(cum, axis=axis), 0.0))


# Hock (1999) model 2 parameters (Storglaciären snow; a published example, not a calibration)
HOCK_MF = 1.8
"""Melt factor [mm w.e. h⁻¹ °C⁻¹] [memory: Hock 1999 order of magnitude]."""
HOCK_A_SNOW = 0.0008
"""Radiation coefficient for snow [mm w.e. h⁻¹ °C⁻¹ (W/m²)⁻¹] [memory: Hock 1999 order of magnitude]."""


def hock_melt_kg_m2(air_temp_c, hours, potential_radiation_w_m2=0.0, melt_factor=HOCK_MF,
                    radiation_coeff=HOCK_A_SNOW):
    """Temperature-index melt with potential direct radiation, Hock (1999) [kg/m² = mm w.e.].

    ``M = (MF + a·I) · T_a · Δt`` for T_a > 0, else 0 (Hock 1999, Eq. 3).  An alternative to the
    energy balance where only air temperature is known; its parameters need local calibration.

    Parameters
    ----------
    air_temp_c
        Air temperature [°C].
    hours
        Step length [h].
    potential_radiation_w_m2
        Potential clear-sky direct radiation on the slope [W/m²].
    """
    t = np.maximum(np.asarray(air_temp_c, dtype=float), 0.0)
    return _out((melt_factor + radiation_coeff * np.asarray(potential_radiation_w_m2, dtype=float)) * t
                * np.asarray(hours, dtype=float))
