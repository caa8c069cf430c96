"""Greenhouse-gas emissions of each truck per year: factor sets, scopes, grid, hour matching.

The model turns the yearly physical quantities of :class:`tco.operation.AnnualOperation`
(diesel and DEF volumes, electricity at the meter, distance, payload-distance) into
kilograms of CO2e, in the frames a sustainability officer reports: GHG Protocol Scope 1,
Scope 2 (location- and market-based side by side), Scope 3 category 3, and the transport
view of ISO 14083 (tank-to-wheel, well-to-wheel, grams CO2e per tonne-km and per km).
An optional life-cycle add-on (manufacturing of vehicle and battery) is kept apart from
all operational totals.

Method
------
Line items per truck and year ``y`` (all in kg CO2e; volumes in m³, energy in J)::

    diesel_co2            = V_diesel · f_CO2                          Scope 1 (TTW)
    diesel_ch4_n2o        = V_diesel · Σ_g f_g · GWP_g + d · Σ_g f'_g · GWP_g
                                                                      Scope 1 (TTW)
    def_urea_co2          = V_DEF · ρ_DEF · w_urea · 12/60 · 44/12    Scope 1 (TTW)
    electricity_location  = (E_depot · m + E_public) · I(y)           Scope 2, location
    electricity_market    = (1 − r) · E_depot · (I_supplier  or  m · I(y))
                            + E_public · I(y)                         Scope 2, market
    diesel_upstream       = V_diesel · f_WTT                          Scope 3 cat. 3
    electricity_upstream  = E · u                                     Scope 3 cat. 3
    electricity_td_losses = electricity_location · L / (1 − L)        Scope 3 cat. 3

with ``E = E_depot + E_public`` the electricity at the meter (charging losses included),
``d`` the distance (per-distance CH4/N2O factors), ``r`` the contracted renewable share,
``u`` the electricity upstream factor and ``L`` the transmission-and-distribution loss
share of the grid. The supplier contract and the renewable share cover depot electricity
only; public charging is bought from others and counted at the grid intensity in both
Scope 2 figures. The Scope 3 category 3 lines are the same in the location- and the
market-based totals. The grid intensity follows either a compound trajectory

    I(y) = max(I0 · (1 + c)^(y − y0), min(I_floor, I0))

or a year table (linear between listed years, held flat outside them). The hour-matching
multiplier of depot charging is ``m = Σ_h p_h · s_h / mean(s)`` with ``p`` the 24 hour-of-day
shares of the charging schedule and ``s`` the hour-of-day intensity profile; a flat profile
gives ``m = 1``.

Frames: Scope 1 = the three diesel/DEF lines = tank-to-wheel (TTW); well-to-tank (WTT) =
Scope 2 + Scope 3 cat. 3; well-to-wheel (WTW) = TTW + WTT = Scope 1 + 2 + 3 cat. 3, on the
location basis (``wtw``) and the market basis (``wtw_market``). Intensities are
WTW (or TTW) divided by payload-distance or distance.

Comparison: avoided emissions of truck ``k`` in year ``y`` are
``WTW_ref(y) − WTW_k(y)``; the abatement cost is ``ΔPV / Σ_y avoided(y) · w_y`` with
``ΔPV = PV cost_k − PV cost_ref`` from the cash-flow model and
``w_y = (1 + i)^-(y − y0 + 1)`` (default: tonnes discounted like the costs, as a levelized
cost discounts both) or ``w_y = 1`` (undiscounted tonnes); both are reported.

References
----------
.. [1] IPCC (2006), 2006 IPCC Guidelines for National Greenhouse Gas Inventories, Vol. 2
   Energy, Ch. 1 (Tables 1.2, 1.4) and Ch. 3 Mobile Combustion (Table 3.2.2; urea-based
   catalytic converters, Eq. 3.2.2).
.. [2] US EPA (2025), GHG Emission Factors Hub, Tables 2 and 4.
.. [6] UK Department for Energy Security and Net Zero (2025), Greenhouse gas reporting:
   conversion factors 2025 (Fuels; WTT- fuels).
.. [3] CEN (2012), EN 16258:2012 Methodology for calculation and declaration of energy
   consumption and GHG emissions of transport services, Annex A.
.. [4] WRI/WBCSD (2015), GHG Protocol Scope 2 Guidance; (2011) Corporate Value Chain
   (Scope 3) Standard, category 3.
.. [5] ISO 14083:2023, Greenhouse gases — Quantification and reporting of greenhouse gas
   emissions arising from transport chain operations.
"""
from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import TYPE_CHECKING, Any, Mapping, Sequence

import numpy as np
import pandas as pd

from tco.emission_factors import (  # noqa: F401  (re-exported: the model's public names)
    DATA_DIR,
    OPTIONAL_COLUMNS,
    QUANTITIES,
    REQUIRED_COLUMNS,
    SHIPPED_TABLES,
    UPSTREAM_FALLBACK_SET,
    diesel_sets,
    factor_table,
    gwp_sets,
    hourly_profile_24,
    load_factor_table,
)
from tco.errors import InputError
from tco.report import formatting as fm
from tco.units import J_PER_KWH

if TYPE_CHECKING:  # pragma: no cover
    from tco.operation import AnnualOperation
    from tco.scenario.emissions import EmissionsSettings

#: Molar-mass ratios of the IPCC 2006 urea equation (Vol. 2 Ch. 3): C in urea, CO2 per C.
UREA_CARBON_RATIO = 12.0 / 60.0
CO2_PER_CARBON = 44.0 / 12.0

#: Line items: (name, scope, basis). Basis "both" lines belong to the location- and the
#: market-based totals; the two Scope 2 lines are alternatives, never added together.
LINES: tuple[tuple[str, str, str], ...] = (
    ("diesel_co2", "scope_1", "both"),
    ("diesel_ch4_n2o", "scope_1", "both"),
    ("def_urea_co2", "scope_1", "both"),
    ("electricity_location", "scope_2", "location"),
    ("electricity_market", "scope_2", "market"),
    ("diesel_upstream", "scope_3_cat3", "both"),
    ("electricity_upstream", "scope_3_cat3", "both"),
    ("electricity_td_losses", "scope_3_cat3", "both"),
)
LINE_NAMES = tuple(n for n, _, _ in LINES)

#: Reporting frames built from the lines (kg CO2e per year).
FRAMES = (
    "scope_1", "scope_2_location", "scope_2_market", "scope_3_cat3",
    "total_location", "total_market", "ttw", "wtt", "wtt_market", "wtw", "wtw_market",
)

# --------------------------------------------------------------------------- diesel
@dataclass(frozen=True)
class DieselFactors:
    """Diesel factors of one set and GWP set, per volume of fuel (SI).

    Attributes
    ----------
    co2 : float
        Tank-to-wheel CO2 (all-gas CO2e when the set gives one figure). [kg/m³]
    ch4_n2o : float
        CH4 and N2O as CO2e, per volume. [kg/m³]
    ch4_n2o_distance : float
        CH4 and N2O as CO2e, per distance driven. [kg/m]
    upstream : float or None
        Well-to-tank CO2e, or None when the set has none. [kg/m³]
    all_gas : bool
        True when ``co2`` already holds all gases (CH4 and N2O inside it).
    rows : pandas.DataFrame
        The table rows used.
    """

    co2: float
    ch4_n2o: float
    ch4_n2o_distance: float
    upstream: float | None
    all_gas: bool
    rows: pd.DataFrame = field(repr=False)


def _per_volume(row: pd.Series, rows: pd.DataFrame) -> float:
    """A fuel factor on a per-volume basis [kg/m³]."""
    v = float(row.value_si)
    if row.basis == "volume":
        return v
    density = float(rows.loc[rows.quantity == "diesel.density", "value_si"].iloc[0])
    if row.basis == "mass":
        return v * density
    ncv = float(rows.loc[rows.quantity == "diesel.net_calorific_value", "value_si"].iloc[0])
    return v * ncv * density  # energy basis: [kg/J]·[J/kg]·[kg/m³]


def diesel_factors(table: pd.DataFrame, set_name: str, gwp_set: str) -> DieselFactors:
    """Resolve a diesel factor set to per-volume figures with a GWP set.

    ``co2 = f_CO2`` (or ``f_CO2e,TTW``); ``ch4_n2o = f_CH4·GWP_CH4 + f_N2O·GWP_N2O``;
    ``upstream = f_WTT`` or ``f_WTW − TTW`` (per volume).

    Parameters
    ----------
    table : pandas.DataFrame
        From :func:`factor_table`.
    set_name : str
        Diesel factor set name.
    gwp_set : str
        GWP set name.

    Returns
    -------
    DieselFactors

    Raises
    ------
    InputError
        Unknown set names, or a well-to-wheel figure below the tank-to-wheel one.

    Examples
    --------
    >>> f = diesel_factors(factor_table(), "en_16258_2012", "ipcc_ar5")
    >>> round(f.co2 / 1000, 2), round(f.upstream / 1000, 2)   # kg CO2e per litre
    (2.67, 0.57)
    """
    if set_name not in diesel_sets(table):
        raise InputError(f"unknown diesel factor set '{set_name}' (known: "
                         f"{', '.join(diesel_sets(table))})", where="emissions.diesel_factors")
    gwp = gwp_values(table, gwp_set)
    rows = table[table["set"] == set_name]
    by_q = {r.quantity: r for r in rows.itertuples(index=False)}
    all_gas = "diesel.co2e_ttw" in by_q
    co2 = _per_volume(by_q["diesel.co2e_ttw" if all_gas else "diesel.co2"], rows)
    vol = dist = 0.0
    for gas in ("ch4", "n2o"):
        r = by_q.get(f"diesel.{gas}")
        if r is None:
            continue
        if r.basis == "distance":
            dist += r.value_si * gwp[gas]
        else:
            vol += _per_volume(r, rows) * gwp[gas]
    upstream = None
    if "diesel.co2e_wtt" in by_q:
        upstream = _per_volume(by_q["diesel.co2e_wtt"], rows)
    elif "diesel.co2e_wtw" in by_q:
        upstream = _per_volume(by_q["diesel.co2e_wtw"], rows) - co2 - vol
        if upstream < 0:
            r = by_q["diesel.co2e_wtw"]
            raise InputError("well-to-wheel figure is below the tank-to-wheel one",
                             file=r.file, where=f"row {r.row}")
    return DieselFactors(co2, vol, dist, upstream, all_gas, rows)


def gwp_values(table: pd.DataFrame, gwp_set: str) -> dict[str, float]:
    """GWP100 of CO2, CH4 and N2O of a named set, e.g. ``{"co2": 1, "ch4": 28, "n2o": 265}``."""
    if gwp_set not in gwp_sets(table):
        raise InputError(f"unknown GWP set '{gwp_set}' (known: {', '.join(gwp_sets(table))})",
                         where="emissions.gwp")
    rows = table[(table["set"] == gwp_set) & table.quantity.str.startswith("gwp.")]
    out = {"co2": 1.0}
    out.update({q.split(".")[1]: float(v) for q, v in zip(rows.quantity, rows.value_si)})
    return out


def urea_co2(def_mass, urea_share=0.325):
    """CO2 released from the urea in diesel exhaust fluid (IPCC 2006 equation).

    ``CO2 = m_DEF · w_urea · 12/60 · 44/12``

    Parameters
    ----------
    def_mass : float or array_like
        Mass of diesel exhaust fluid used. [kg]
    urea_share : float or array_like
        Urea mass fraction of the fluid (0.325 for the standard fluid). [-]

    Returns
    -------
    float, numpy.ndarray or pandas.Series
        CO2 released (same type as ``def_mass``). [kg]

    Notes
    -----
    All carbon in the urea is taken to leave as CO2 (the IPCC default).

    Examples
    --------
    >>> round(urea_co2(1.0), 4)
    0.2383

    References
    ----------
    .. [1] IPCC (2006), 2006 IPCC Guidelines, Vol. 2, Ch. 3, Eq. 3.2.2 (urea-based
       catalytic converters).
    """
    if isinstance(def_mass, (list, tuple)):
        def_mass = np.asarray(def_mass, dtype=float)
    if isinstance(urea_share, (list, tuple)):
        urea_share = np.asarray(urea_share, dtype=float)
    return def_mass * urea_share * UREA_CARBON_RATIO * CO2_PER_CARBON


# --------------------------------------------------------------------------- electricity
def _col(x) -> np.ndarray:
    """A scalar or (n,) array as a column broadcasting against years: (1,) or (n, 1)."""
    return np.asarray(x, dtype=float)[..., None]


def grid_intensity_path(years, start, change=0.0, floor=0.0, table=None):
    """Location-based grid intensity in each year.

    Trajectory: ``I(y) = max(I0 · (1 + c)^(y − y0), min(I_floor, I0))``.
    Table: linear interpolation between listed years, flat outside, scaled by
    ``I0 / I(first listed year)``.

    Parameters
    ----------
    years : array_like of int
        The years, first = ``y0``. [yr]
    start : float or array_like
        Intensity in the first year (trajectory), or in the table's first listed year
        (table). [kg/J]
    change : float or array_like
        Compound change per year (−0.03 for 3 % lower each year). [-/yr]
    floor : float or array_like
        The decline stops at this intensity; it never raises the start value. [kg/J]
    table : mapping of int to float or array_like, optional
        Intensity by year. [kg/J]

    Returns
    -------
    numpy.ndarray
        Shape ``(n_years,)`` for scalar inputs, ``(n_draws, n_years)`` for arrays. [kg/J]

    Examples
    --------
    >>> grid_intensity_path([2030, 2031, 2032], 100.0, -0.5, 30.0).tolist()
    [100.0, 50.0, 30.0]
    """
    y = np.asarray(years, dtype=float)
    start = _col(start)
    if table is None:
        path = start * (1.0 + _col(change)) ** (y - y[0])
        return np.maximum(path, np.minimum(_col(floor), start))
    weights, values, scale = _table_parts(y, table, start)
    path = np.tensordot(weights, values, axes=(1, 0))  # (ny,) or (ny, n)
    path = np.moveaxis(path, 0, -1)
    return path * scale


def _table_parts(y: np.ndarray, table, start: np.ndarray):
    """A year table's interpolation weights (n_years, k), its values (k,) or (k, n) and
    the scale ``I0 / I(first listed year)`` as a column (1,) or (n, 1)."""
    ty = np.array(sorted(table), dtype=float)
    values = np.stack(np.broadcast_arrays(
        *[np.asarray(table[k], dtype=float) for k in sorted(table)]))  # (k,) or (k, n)
    eye = np.eye(len(ty))
    weights = np.stack([np.interp(y, ty, eye[j]) for j in range(len(ty))], axis=1)  # (ny,k)
    first = values[0][..., None]
    scale = np.divide(start, first, out=np.ones(np.broadcast_shapes(start.shape, first.shape)),
                      where=first > 0)
    return weights, values, scale


def _grid_total(years, p: Mapping[str, Any], table: dict) -> np.ndarray:
    """Σ over the years of :func:`grid_intensity_path` (the same values, summed), as a
    column (1,) or (n, 1), without an (n, years) array. [kg/J·yr]"""
    y = np.asarray(years, dtype=float)
    start = _col(p[_P + "grid_intensity"])
    if table:  # linear in the listed values: sum the interpolation weights first
        weights, values, scale = _table_parts(y, table, start)
        return _col(np.tensordot(weights.sum(axis=0), values, axes=(0, 0))) * scale
    growth = (1.0 + _col(p[_P + "grid_change"])) ** (y - y[0])  # (ny,) or (n, ny)
    lowest = np.minimum(_col(p[_P + "grid_floor"]), start)
    if np.all(lowest <= 0) and np.all(start >= 0):  # no floor: I(y) = I0·growth(y)
        return start * growth.sum(axis=-1, keepdims=True)
    total = np.zeros_like(start)
    for t in range(y.size):  # one year at a time on (n,) rows
        total = total + np.maximum(start * growth[..., t:t + 1], lowest)
    return total


def hour_matching_factor(charging_profile, shape) -> np.ndarray | float:
    """Multiplier on the annual intensity for a charging schedule and an hourly profile.

    ``m = Σ_h p_h · s_h / mean(s)``, with ``p`` normalised to sum 1.

    Parameters
    ----------
    charging_profile : array_like, shape (24,)
        Share of depot grid energy drawn in each hour of the day. [-]
    shape : array_like, shape (24,) or (24, n_draws)
        Hour-of-day intensity profile (any scale). [-]

    Returns
    -------
    float or numpy.ndarray
        The multiplier; 1 for a flat profile or a flat schedule. [-]

    Examples
    --------
    >>> hour_matching_factor([1/24] * 24, range(1, 25))
    1.0
    """
    p = np.asarray(charging_profile, dtype=float)
    total = p.sum()
    p = p / total if total > 0 else np.full(24, 1 / 24)
    s = np.asarray(shape, dtype=float)
    m = np.tensordot(p, s, axes=(0, 0)) / s.mean(axis=0)
    return float(m) if np.ndim(m) == 0 else m


# --------------------------------------------------------------------------- parameters
_P = "emissions."


def _resolve(settings: "EmissionsSettings") -> tuple[dict[str, float], list[dict], list[str]]:
    """Flat parameters, the provenance rows and notes of a validated settings section."""
    table = factor_table(settings.factor_file)
    d = diesel_factors(table, settings.diesel_factors, settings.gwp)
    fields = type(settings).model_fields
    src = lambda name: "user" if name in settings.model_fields_set \
        else fields[name].json_schema_extra.get("source", "")  # noqa: E731
    prov: list[dict] = []
    notes: list[str] = []

    def add(parameter, value, unit, source, status=""):
        prov.append({"parameter": parameter, "value": value, "unit": unit,
                     "source": source, "status": status})

    for r in d.rows.itertuples(index=False):
        add(f"{settings.diesel_factors}:{r.quantity}", r.value, r.unit, r.source, r.status)
    grows = table[table["set"] == settings.gwp]
    for r in grows.itertuples(index=False):
        add(f"{settings.gwp}:{r.quantity}", r.value, r.unit, r.source, r.status)
    if d.all_gas:
        notes.append(f"The diesel factor set {settings.diesel_factors} gives one tank-to-wheel "
                     "CO2e figure for all gases: it is counted as the diesel's CO2 factor, "
                     "with CH4 and N2O inside it (not added again).")

    upstream = d.upstream
    if settings.diesel_upstream is not None:
        upstream = settings.diesel_upstream
        add("diesel_upstream", upstream / 1000, "kg/L", "user")
    elif upstream is None:
        fb = diesel_factors(table, UPSTREAM_FALLBACK_SET, settings.gwp)
        upstream = fb.upstream
        for r in fb.rows.itertuples(index=False):
            add(f"{UPSTREAM_FALLBACK_SET}:{r.quantity}", r.value, r.unit, r.source, r.status)
        notes.append(f"{settings.diesel_factors} gives no well-to-tank figure: diesel upstream "
                     f"uses the well-to-tank figure of {UPSTREAM_FALLBACK_SET}.")

    p: dict[str, float] = {
        _P + "diesel_co2": d.co2,
        _P + "diesel_ch4_n2o": d.ch4_n2o,
        _P + "diesel_ch4_n2o_distance": d.ch4_n2o_distance,
        _P + "diesel_upstream": float(upstream),
        _P + "def_density": settings.def_density,
        _P + "def_urea_share": settings.def_urea_share,
        _P + "renewable_share": settings.renewable_share,
        _P + "td_loss": settings.td_loss,
        _P + "electricity_upstream": (settings.electricity_upstream
                                      if settings.electricity_upstream is not None else 0.0),
        _P + "electricity_upstream_share": (0.0 if settings.electricity_upstream is not None
                                            else settings.electricity_upstream_share),
        _P + "diesel_blend_share": settings.diesel_blend_share,
        _P + "biodiesel_co2": settings.biodiesel_co2,
        _P + "biodiesel_upstream": float(settings.biodiesel_upstream
                                         if settings.biodiesel_upstream is not None
                                         else upstream),
    }
    add("def_density", settings.def_density / 1000, "kg/L", src("def_density"))
    add("def_urea_share", settings.def_urea_share * 100, "%", src("def_urea_share"))

    profile = settings.hourly_values()
    shape24 = np.ones(24)
    start = settings.grid_intensity
    if profile is not None:
        prof24 = hourly_profile_24(profile)
        shape24 = prof24 / prof24.mean()
        if settings.hourly_profile_kind == "absolute":
            start = to_si_intensity(prof24.mean())
            notes.append("Grid intensity in the first year is the mean of the absolute hourly "
                         "profile.")
    if settings.grid_table:
        for year, value in sorted(settings.grid_table.items()):
            p[f"{_P}grid_table.{int(year)}"] = float(value)
            add(f"grid_table.{int(year)}", value * 3.6e9, "g/kWh", src("grid_table"))
        start = float(settings.grid_table[min(settings.grid_table)])
        p[_P + "grid_intensity"] = start
    else:
        p[_P + "grid_intensity"] = float(start)
        p[_P + "grid_change"] = settings.grid_change
        p[_P + "grid_floor"] = settings.grid_floor
        source = "mean of the absolute hourly profile" if (
            profile is not None and settings.hourly_profile_kind == "absolute") \
            else src("grid_intensity")
        add("grid_intensity", float(start) * 3.6e9, "g/kWh", source)
        add("grid_change", settings.grid_change * 100, "%/yr", src("grid_change"))
        add("grid_floor", settings.grid_floor * 3.6e9, "g/kWh", src("grid_floor"))
    for h in range(24):
        p[f"{_P}hourly_shape.{h:02d}"] = float(shape24[h])
    if settings.supplier_intensity is not None:
        p[_P + "supplier_intensity"] = settings.supplier_intensity
        add("supplier_intensity", settings.supplier_intensity * 3.6e9, "g/kWh", "user")
    add("renewable_share", settings.renewable_share * 100, "%", src("renewable_share"))
    add("td_loss", settings.td_loss * 100, "%", src("td_loss"))
    if settings.electricity_upstream is not None:
        add("electricity_upstream", settings.electricity_upstream * 3.6e9, "g/kWh",
            src("electricity_upstream"))
    else:
        add("electricity_upstream_share", settings.electricity_upstream_share * 100,
            "% of the grid intensity", src("electricity_upstream_share"),
            "" if "electricity_upstream_share" in settings.model_fields_set
            else "from memory")
    if settings.residual_mix_intensity is not None:
        # the residual mix follows the grid's path in proportion to its first-year value
        first = p[_P + "grid_intensity"]
        p[_P + "residual_mix_ratio"] = (settings.residual_mix_intensity / first
                                        if first > 0 else 1.0)
        add("residual_mix_intensity", settings.residual_mix_intensity * 3.6e9, "g/kWh",
            f"user: {settings.residual_mix_source}")
    else:
        p[_P + "residual_mix_ratio"] = 1.0
    add("diesel_blend_share", settings.diesel_blend_share * 100, "% by volume",
        src("diesel_blend_share"))
    if settings.diesel_blend_share > 0:
        add("biodiesel_co2", settings.biodiesel_co2 / 1000, "kg CO2/L (biogenic)",
            src("biodiesel_co2"),
            "" if "biodiesel_co2" in settings.model_fields_set else "from memory")
        add("biodiesel_upstream", p[_P + "biodiesel_upstream"] / 1000, "kg CO2e/L",
            src("biodiesel_upstream"))
    lc = settings.lifecycle
    if lc.include:
        p[_P + "lifecycle.vehicle_diesel"] = lc.vehicle_diesel
        p[_P + "lifecycle.vehicle_electric"] = lc.vehicle_electric
        p[_P + "lifecycle.battery"] = lc.battery
        add("lifecycle.vehicle_diesel", lc.vehicle_diesel, "kg CO2e", "user")
        add("lifecycle.vehicle_electric", lc.vehicle_electric, "kg CO2e", "user")
        add("lifecycle.battery", lc.battery * J_PER_KWH, "kg CO2e/kWh", "user")
    return p, prov, notes


def to_si_intensity(g_per_kwh: float) -> float:
    """Grid intensity from g/kWh to SI. [kg/J]"""
    return float(g_per_kwh) / 3.6e9


def flat_params(settings: "EmissionsSettings") -> dict[str, float]:
    """The emissions inputs as flat numbers under dotted paths, all SI.

    Factor-set names are resolved to numbers here, so the Monte Carlo can override any of
    them with an array of draws (see :func:`compute`).

    Parameters
    ----------
    settings : EmissionsSettings
        The validated ``emissions`` section.

    Returns
    -------
    dict of str to float
        Keys (always): ``emissions.diesel_co2`` [kg/m³], ``emissions.diesel_ch4_n2o``
        [kg/m³], ``emissions.diesel_ch4_n2o_distance`` [kg/m], ``emissions.diesel_upstream``
        [kg/m³], ``emissions.def_density`` [kg/m³], ``emissions.def_urea_share`` [-],
        ``emissions.grid_intensity`` [kg/J], ``emissions.hourly_shape.00`` …
        ``emissions.hourly_shape.23`` [-], ``emissions.renewable_share`` [-],
        ``emissions.td_loss`` [-], ``emissions.electricity_upstream`` [kg/J].
        Trajectory mode adds ``emissions.grid_change`` [-/yr] and ``emissions.grid_floor``
        [kg/J]; table mode adds ``emissions.grid_table.<year>`` [kg/J] (and then
        ``emissions.grid_intensity`` is the first listed year's value and scales the whole
        table). Optional: ``emissions.supplier_intensity`` [kg/J];
        ``emissions.lifecycle.vehicle_diesel``, ``.vehicle_electric`` [kg],
        ``.battery`` [kg/J] when the life-cycle add-on is on.
    """
    return _resolve(settings)[0]


def factor_provenance(settings: "EmissionsSettings") -> pd.DataFrame:
    """Every factor the settings use, in display units, with its source and status."""
    return pd.DataFrame(_resolve(settings)[1],
                        columns=["parameter", "value", "unit", "source", "status"])


# --------------------------------------------------------------------------- core
_OP_FIELDS = ("diesel_volume", "def_volume", "grid_energy_depot", "grid_energy_public",
              "distance", "payload_distance")


def _used(key: str) -> bool:
    """Keys of the flat parameters this model reads."""
    return key.startswith(_P) or key == "route.days_per_year"


def _merge(params: Mapping[str, Any], overrides: Mapping[str, Any] | None) -> dict[str, Any]:
    p = dict(params)
    for key, value in (overrides or {}).items():
        if key.startswith(_P) and key not in params:
            raise InputError(f"unknown parameter '{key}' (not in flat_params of these "
                             "settings)", where=key)
        p[key] = value
    for key, value in p.items():
        if type(value) is not float and _used(key) and np.ndim(value) > 1:
            raise InputError("a parameter must be a number or a 1-D array of draws", where=key)
    for key, lo, hi in (("renewable_share", 0, 1), ("td_loss", 0, 0.999999),
                        ("def_urea_share", 0, 1), ("diesel_blend_share", 0, 1)):
        v = p.get(_P + key, 0.0)
        if type(v) is float:  # (a plain number: the same test without numpy's overhead)
            out = v < lo or v > hi
        else:
            v = np.asarray(v, dtype=float)
            out = np.any((v < lo) | (v > hi))
        if out:
            raise InputError(f"must be within {fm.plain(lo * 100)}–{fm.plain(hi * 100)} %",
                             where=_P + key)
    return p


def compute(params: Mapping[str, Any], operations: Sequence["AnnualOperation"], years,
            overrides: Mapping[str, Any] | None = None) -> dict[str, dict[str, np.ndarray]]:
    """Yearly emissions lines and frames of each truck, vectorised over draws.

    See the module docstring for the equations.

    Parameters
    ----------
    params : mapping of str to float
        From :func:`flat_params` (other sections' keys may be present; they are ignored
        except ``route.days_per_year``).
    operations : sequence of AnnualOperation
        One per truck (year-1 quantities, the same every year). Its quantities may be
        floats or arrays of shape (n_draws,).
    years : array_like of int
        The years of service, e.g. calendar years 2026 … 2040. [yr]
    overrides : mapping of str to float or array_like, optional
        Replacement values (arrays of shape (n_draws,)) for keys of ``params``; the key
        ``route.days_per_year`` [1/yr] scales every yearly quantity by
        ``days_per_year / operation.operating_days``.

    Returns
    -------
    dict
        ``{truck: {name: array}}`` with the line items of :data:`LINES` and the frames of
        :data:`FRAMES` [kg CO2e/yr], and ``distance`` [m/yr] and ``payload_distance``
        [kg·m/yr]. Each array has shape ``(n_years,)`` when every input is scalar, else
        ``(n_draws, n_years)``. Arrays are read-only broadcast views where a quantity does
        not change over years or draws (no memory is spent on repeats): copy one before
        writing into it.

    Raises
    ------
    InputError
        Unknown override keys, shares out of range, mismatched draw counts, empty years,
        grid table years that miss the years of service.
    """
    p, years, lead, table = _prepare(params, operations, years, overrides)
    shape = (*lead, years.size)
    full = lambda a: np.broadcast_to(a, shape)  # noqa: E731  (read-only view, no copy)
    if table:
        grid = grid_intensity_path(years, p[_P + "grid_intensity"], table=table)
    else:
        grid = grid_intensity_path(years, p[_P + "grid_intensity"], p[_P + "grid_change"],
                                   p[_P + "grid_floor"])
    shape24 = _hourly_shape(p)
    out: dict[str, dict[str, np.ndarray]] = {}
    for op in operations:
        q = _quantities(op, _days_scale(p, op))
        lines = _truck_lines(p, op, q, grid, shape24)
        res = {k: full(v) for k, v in lines.items()}
        res.update({k: full(v) for k, v in _frames(lines).items()})
        res["distance"] = full(q["distance"])
        res["payload_distance"] = full(q["payload_distance"])
        out[op.truck] = res
    return out


def totals(params: Mapping[str, Any], operations: Sequence["AnnualOperation"], years,
           overrides: Mapping[str, Any] | None = None,
           names: Sequence[str] = ("wtw", "wtw_market")) -> dict[str, dict[str, np.ndarray]]:
    """Sums over the years of service of chosen lines and frames: the lean path of
    :func:`compute` for Monte Carlo.

    Every line is either the same each year or proportional to the grid intensity
    ``I(y)`` with a coefficient that does not change over the years, so its sum is the
    yearly formula with every quantity times the number of years ``n`` and the intensity
    at its mean over the years:

    .. math:: \\sum_y \\left(a + b\\,I(y)\\right) = n\\,a + n\\,b\\,\\bar I,
              \\qquad \\bar I = \\frac{1}{n} \\sum_y I(y)

    Only ``Σ_y I(y)`` is worked out year by year, on (n_draws,) rows; nothing of shape
    (n_draws, n_years) is made.

    Parameters
    ----------
    params, operations, years, overrides
        As for :func:`compute`.
    names : sequence of str
        Line items of :data:`LINES`, frames of :data:`FRAMES`, ``distance`` or
        ``payload_distance``.

    Returns
    -------
    dict
        ``{truck: {name: array}}``, each the sum over the years [kg CO2e, m or kg·m] of
        shape ``()`` when every input is scalar, else ``(n_draws,)``; equal to
        ``compute(...)[truck][name].sum(-1)`` to rounding.

    Raises
    ------
    InputError
        As :func:`compute`.
    ValueError
        An unknown name.

    Examples
    --------
    >>> from tco.operation import AnnualOperation
    >>> from tco.scenario.emissions import EmissionsSettings
    >>> op = AnnualOperation("D", "diesel", 250.0, 500.0, 0.0, 1e8, 2e12, diesel_volume=30.0)
    >>> p = flat_params(EmissionsSettings())
    >>> summed = totals(p, [op], range(2030, 2040))["D"]["wtw"]
    >>> yearly = compute(p, [op], range(2030, 2040))["D"]["wtw"]
    >>> bool(np.isclose(summed, yearly.sum(), rtol=1e-12))
    True
    """
    unknown = [n for n in names if n not in (*LINE_NAMES, *FRAMES, "distance",
                                             "payload_distance", "biogenic_co2")]
    if unknown:
        raise ValueError(f"unknown line or frame {unknown[0]!r}")
    p, years, lead, table = _prepare(params, operations, years, overrides)
    n_years = years.size
    mean_grid = _grid_total(years, p, table) / n_years
    shape24 = _hourly_shape(p)
    out: dict[str, dict[str, np.ndarray]] = {}
    for op in operations:
        # the distances only where a line reads them (a diesel truck's CH4 and N2O by
        # distance) or they are asked for: each is one pass over the draws
        fields = [f for f in _OP_FIELDS if f in names or f not in ("distance", "payload_distance")
                  or (f == "distance" and op.powertrain == "diesel")]
        q = _quantities(op, _days_scale(p, op) * n_years, fields)
        values = _truck_lines(p, op, q, mean_grid, shape24)
        if any(n in FRAMES for n in names):
            values.update(_frames(values))
        values.update({f: q[f] for f in ("distance", "payload_distance") if f in q})
        out[op.truck] = {n: np.broadcast_to(values[n][..., 0], lead) for n in names}
    return out


def _prepare(params, operations, years, overrides):
    """Merged parameters, the years, the shape of the draws and the grid table (if any)."""
    p = _merge(params, overrides)
    years = np.asarray(years)
    if years.ndim != 1 or years.size == 0:
        raise InputError("years must be a non-empty 1-D sequence", where="years")
    values = [v for k, v in p.items() if _used(k)]
    values += [getattr(op, f) for op in operations for f in _OP_FIELDS]
    shapes = [np.shape(v) for v in values if type(v) is not float]  # (a float is ())
    try:
        lead = np.broadcast_shapes(*[s for s in shapes if len(s) == 1])
    except ValueError:
        raise InputError("arrays of draws have different lengths", where="overrides") from None
    table = {int(k[len(_P) + 11:]): v for k, v in p.items() if k.startswith(_P + "grid_table.")}
    if table:
        lo, hi = min(table), max(table)
        if hi < years.min() or lo > years.max():
            raise InputError(f"grid table years {lo}–{hi} do not overlap the years of service "
                             f"{int(years.min())}–{int(years.max())}",
                             where="emissions.grid_table")
    return p, years, lead, table


def _days_scale(p: Mapping[str, Any], op: "AnnualOperation"):
    """Factor on an operation's yearly quantities for ``route.days_per_year``."""
    days = p.get("route.days_per_year")
    if days is None:
        return 1.0
    if not op.operating_days > 0:
        raise InputError("operating_days must be positive to scale by days per year",
                         where=f"operation[{op.truck}]")
    return _col(days) / op.operating_days


def _quantities(op: "AnnualOperation", scale, fields=_OP_FIELDS) -> dict[str, np.ndarray]:
    """An operation's yearly quantities (``fields`` of them) as columns, times ``scale``. A
    quantity that is zero (a diesel truck's electricity) stays one zero, not one per
    draw."""
    return {f: _col(v) * scale if np.ndim(v) or v != 0 else _col(0.0)
            for f in fields for v in [getattr(op, f)]}


def _hourly_shape(p: Mapping[str, Any]) -> np.ndarray:
    """The 24 hour-of-day intensity shares, (24,) or (24, n). [-]"""
    values = [p[f"{_P}hourly_shape.{h:02d}"] for h in range(24)]
    if all(type(v) is float for v in values):  # plain numbers: one array at once
        return np.array(values, dtype=float)
    return np.stack(np.broadcast_arrays(*[np.asarray(v, dtype=float) for v in values]))


def _truck_lines(p: Mapping[str, Any], op: "AnnualOperation", q: dict, grid: np.ndarray,
                 shape24: np.ndarray) -> dict[str, np.ndarray]:
    """The line items of one truck from its quantities ``q`` (columns), the grid
    intensity ``grid`` (by year, or any value that stands for it) and the hour-of-day
    shape of the intensity."""
    supplier = p.get(_P + "supplier_intensity")
    share = _col(p[_P + "renewable_share"])
    residual = _col(p.get(_P + "residual_mix_ratio", 1.0))  # residual mix / grid average
    blend = _col(p.get(_P + "diesel_blend_share", 0.0))
    fossil = q["diesel_volume"] * (1.0 - blend)
    bio = q["diesel_volume"] * blend
    loss = _col(p[_P + "td_loss"])
    e_total = q["grid_energy_depot"] + q["grid_energy_public"]
    match = _col(hour_matching_factor(op.charging_profile, shape24))
    lines: dict[str, np.ndarray] = {}
    lines["diesel_co2"] = fossil * _col(p[_P + "diesel_co2"])
    ch4 = q["diesel_volume"] * _col(p[_P + "diesel_ch4_n2o"])
    if op.powertrain == "diesel":
        ch4 = ch4 + q["distance"] * _col(p[_P + "diesel_ch4_n2o_distance"])
    lines["diesel_ch4_n2o"] = ch4
    lines["def_urea_co2"] = urea_co2(q["def_volume"] * _col(p[_P + "def_density"]),
                                     _col(p[_P + "def_urea_share"]))
    loc = (q["grid_energy_depot"] * match + q["grid_energy_public"]) * grid
    lines["electricity_location"] = loc
    depot = q["grid_energy_depot"] * (_col(supplier) if supplier is not None
                                      else match * grid * residual)
    lines["electricity_market"] = ((1.0 - share) * depot
                                   + q["grid_energy_public"] * grid * residual)
    lines["diesel_upstream"] = (fossil * _col(p[_P + "diesel_upstream"])
                                + bio * _col(p.get(_P + "biodiesel_upstream",
                                                   p[_P + "diesel_upstream"])))
    lines["electricity_upstream"] = (e_total * _col(p[_P + "electricity_upstream"])
                                     + loc * _col(p.get(_P + "electricity_upstream_share",
                                                        0.0)))
    # biogenic CO2 of the biodiesel in the blend: reported apart, in no scope or frame
    lines["biogenic_co2"] = bio * _col(p.get(_P + "biodiesel_co2", 0.0))
    lines["electricity_td_losses"] = loc * loss / (1.0 - loss)
    return lines


def _frames(lines: Mapping[str, np.ndarray]) -> dict[str, np.ndarray]:
    s1 = lines["diesel_co2"] + lines["diesel_ch4_n2o"] + lines["def_urea_co2"]
    s3 = lines["diesel_upstream"] + lines["electricity_upstream"] \
        + lines["electricity_td_losses"]
    s2l, s2m = lines["electricity_location"], lines["electricity_market"]
    wtt, wtt_m = s2l + s3, s2m + s3
    total, total_m = s1 + wtt, s1 + wtt_m
    # the transport frames are the same sums as the scope frames: share the arrays
    return {
        "scope_1": s1, "scope_2_location": s2l, "scope_2_market": s2m, "scope_3_cat3": s3,
        "total_location": total, "total_market": total_m,
        "ttw": s1, "wtt": wtt, "wtt_market": wtt_m, "wtw": total, "wtw_market": total_m,
    }


# --------------------------------------------------------------------------- comparison
def tonne_weights(n_years: int, discount_rate=None):
    """Weights of each year's tonnes: 1, or ``(1 + i)^-k`` for service year k = 1 … n.

    Parameters
    ----------
    n_years : int
        Number of years.
    discount_rate : float or array_like, optional
        Discount rate; None for undiscounted tonnes. [-/yr]

    Returns
    -------
    numpy.ndarray
        Shape ``(n_years,)`` or ``(n_draws, n_years)``. [-]
    """
    k = np.arange(1, n_years + 1, dtype=float)
    if discount_rate is None:
        return np.ones(n_years)
    return (1.0 + _col(discount_rate)) ** -k


def abatement_cost(cost_difference, avoided, discount_rate=None):
    """Cost per tonne of CO2e avoided.

    ``A = ΔPV / (Σ_k avoided_k · w_k / 1000)``, ``w_k = 1`` or ``(1 + i)^-k``.

    Parameters
    ----------
    cost_difference : float or array_like
        Present-value cost of the truck minus that of the reference truck. [currency]
    avoided : array_like, shape (..., n_years)
        Emissions avoided each year (reference minus truck). [kg CO2e/yr]
    discount_rate : float or array_like, optional
        Discount the tonnes at this rate (None: undiscounted, the default). [-/yr]

    Returns
    -------
    float or numpy.ndarray
        Abatement cost; NaN where no tonnes are avoided. Negative: the truck saves money
        and emissions. [currency/t CO2e]

    Examples
    --------
    >>> abatement_cost(5000.0, [10_000.0, 10_000.0])
    250.0
    """
    avoided = np.asarray(avoided, dtype=float)
    tonnes = (avoided * tonne_weights(avoided.shape[-1], discount_rate)).sum(axis=-1) / 1000
    cost = np.asarray(cost_difference, dtype=float)
    out = np.divide(cost, tonnes, out=np.full(np.broadcast_shapes(cost.shape, tonnes.shape),
                                               np.nan), where=tonnes > 0)
    return float(out) if out.ndim == 0 else out


def manufacturing_emissions(powertrain: str, battery_capacity, vehicle_diesel, vehicle_electric,
                            battery):
    """Manufacturing emissions of one truck (life-cycle add-on).

    ``M = M_vehicle`` (diesel) or ``M_vehicle + b · C_battery`` (electric).

    Parameters
    ----------
    powertrain : {"diesel", "electric"}
    battery_capacity : float or array_like
        Nominal battery capacity. [J]
    vehicle_diesel, vehicle_electric : float or array_like
        Manufacturing of the vehicle without battery. [kg CO2e]
    battery : float or array_like
        Battery manufacturing per unit capacity. [kg/J]

    Returns
    -------
    float or numpy.ndarray
        [kg CO2e]
    """
    if powertrain == "electric":
        return np.asarray(vehicle_electric, float) + np.asarray(battery, float) \
            * np.asarray(battery_capacity, float)
    return np.asarray(vehicle_diesel, float) + 0.0 * np.asarray(battery, float)


def payback(extra, avoided, distance):
    """Distance and time after which avoided emissions repay extra manufacturing emissions.

    The crossing of the cumulative avoided emissions with ``extra`` is interpolated
    linearly inside the year (emissions are avoided evenly over a year).

    Parameters
    ----------
    extra : float or array_like
        Manufacturing emissions of the truck minus those of the reference. [kg CO2e]
    avoided : array_like, shape (..., n_years)
        Emissions avoided each year. [kg CO2e/yr]
    distance : array_like, shape (..., n_years)
        Distance the truck drives each year. [m/yr]

    Returns
    -------
    (numpy.ndarray, numpy.ndarray)
        Payback distance [m] and payback time [yr]; 0 when ``extra <= 0``; NaN when not
        repaid within the years given.

    Examples
    --------
    >>> d, t = payback(15.0, [10.0, 10.0], [100.0, 100.0])
    >>> float(d), float(t)
    (150.0, 1.5)
    """
    avoided = np.asarray(avoided, dtype=float)
    distance = np.broadcast_to(np.asarray(distance, dtype=float), avoided.shape)
    e = _col(extra)
    cum = np.cumsum(avoided, axis=-1)
    prev = cum - avoided
    dprev = np.cumsum(distance, axis=-1) - distance
    hit = cum >= e
    found = hit.any(axis=-1)
    k = np.argmax(hit, axis=-1)
    take = lambda a: np.take_along_axis(np.broadcast_to(a, np.broadcast_shapes(  # noqa: E731
        a.shape, hit.shape)), k[..., None], axis=-1)[..., 0]
    gain = take(avoided)
    frac = np.divide(take(e - prev), gain, out=np.zeros_like(gain), where=gain > 0)
    frac = np.clip(frac, 0.0, 1.0)
    dist = np.where(found, take(dprev) + frac * take(distance), np.nan)
    time = np.where(found, k + frac, np.nan)
    nonpos = np.broadcast_to(e[..., 0] <= 0, dist.shape)
    dist = np.where(nonpos, 0.0, dist)
    time = np.where(nonpos, 0.0, time)
    return dist, time


# --------------------------------------------------------------------------- result
@dataclass
class EmissionsResult:
    """Emissions of every truck, ready for the writers (plain data and pandas objects).

    Attributes
    ----------
    years : list of int
        The years of service.
    powertrains : dict of str to str
        Truck name to ``"diesel"`` or ``"electric"``.
    yearly : pandas.DataFrame
        Tidy line items: ``truck, year, quantity, scope, basis, kg_co2e, cumulative_kg_co2e``
        (``basis`` ``both``/``location``/``market``; the two Scope 2 lines are alternatives).
    totals : pandas.DataFrame
        Tidy frames: ``truck, year, frame, kg_co2e, cumulative_kg_co2e`` with the frames of
        :data:`FRAMES`.
    intensity : pandas.DataFrame
        ``truck, year, frame, kg_per_kg_m, kg_per_m`` for frames ``ttw``, ``wtw``,
        ``wtw_market``: per payload-distance [kg CO2e/(kg·m)] and per distance
        [kg CO2e/m] in each year.
    intensity_total : pandas.DataFrame
        ``truck, frame, kg_per_kg_m, kg_per_m``: the same over all years together.
    comparison : pandas.DataFrame
        ``truck, reference, year, basis, avoided_kg, cumulative_avoided_kg``.
    abatement : dict
        Truck to ``{"cost_difference", "tonnes_location", "tonnes_market",
        "cost_per_tonne_location", "cost_per_tonne_market"}`` [currency, t, currency/t]
        on the chosen convention, and the same keys suffixed ``_discounted`` and
        ``_undiscounted`` for both conventions (NaN for the discounted one when no
        discount rate was given).
    lifecycle : pandas.DataFrame or None
        Life-cycle add-on (outside all scopes): ``truck, manufacturing_kg, extra_kg,
        payback_distance_m, payback_years``.
    factors : pandas.DataFrame
        Factors used with their sources (:func:`factor_provenance`).
    settings : dict
        Choices that shape the figures (factor sets, grid mode, hour matching, discounting).
    cautions : list of str
        Plain-language cautions for the report.
    reference : str
        The reference truck of the comparison.
    biogenic : dict of str to list of float
        Per truck, biogenic CO2 of the biodiesel in the diesel blend by year, reported
        outside the scopes and frames (GHG Protocol). [kg CO2/yr]
    """

    years: list[int]
    powertrains: dict[str, str]
    yearly: pd.DataFrame
    totals: pd.DataFrame
    intensity: pd.DataFrame
    intensity_total: pd.DataFrame
    comparison: pd.DataFrame
    abatement: dict[str, dict[str, float]]
    lifecycle: pd.DataFrame | None
    factors: pd.DataFrame
    settings: dict[str, Any]
    cautions: list[str]
    reference: str
    biogenic: dict[str, list[float]] = field(default_factory=dict)


#: The first caution of every result.
VERIFY_CAUTION = (
    "These emission figures are estimates from a model; before they are reported they must "
    "be checked against the GHG Protocol (Corporate Standard, Scope 2 Guidance, Scope 3 "
    "Standard), ISO 14083 and the rules of the regulator or programme they are reported to, "
    "using measured fuel and electricity data and the factors those rules prescribe."
)


def pick_reference(operations: Sequence["AnnualOperation"], reference: str | None) -> str:
    """The reference truck: the named one, else the first diesel truck, else the first."""
    names = [op.truck for op in operations]
    if reference is not None:
        if reference not in names:
            raise InputError(f"reference truck '{reference}' is not among the trucks "
                             f"({', '.join(names)})", where="reference")
        return reference
    for op in operations:
        if op.powertrain == "diesel":
            return op.truck
    return names[0]


def evaluate(settings: "EmissionsSettings", operations: Sequence["AnnualOperation"], years,
             *, reference: str | None = None,
             cost_difference: Mapping[str, float] | float | None = None,
             discount_rate: float | None = None) -> EmissionsResult:
    """Emissions of every truck for the report (scalar inputs).

    Parameters
    ----------
    settings : EmissionsSettings
        The validated ``emissions`` section.
    operations : sequence of AnnualOperation
        One per truck.
    years : array_like of int
        The years of service. [yr]
    reference : str, optional
        The baseline truck; default the first diesel truck.
    cost_difference : mapping or float, optional
        Present-value cost of each truck minus that of the reference, from the cash-flow
        model [currency]; a float when there is one truck besides the reference.
    discount_rate : float, optional
        Needed when ``settings.discount_tonnes`` is true; when given, the figures on
        discounted tonnes are reported whichever convention is chosen. [-/yr]

    Returns
    -------
    EmissionsResult
    """
    if not operations:
        raise InputError("no trucks to evaluate", where="trucks")
    names = [op.truck for op in operations]
    if len(set(names)) != len(names):
        raise InputError("truck names must be unique", where="trucks")
    if settings.discount_tonnes and discount_rate is None and cost_difference is not None:
        raise InputError("discount_tonnes is true but no discount rate was given",
                         where="emissions.discount_tonnes")
    params, prov, notes = _resolve(settings)
    arrays = compute(params, operations, years)
    years_l = [int(y) for y in np.asarray(years)]
    ref = pick_reference(operations, reference)
    # without a rate (and then without a cost difference) tonnes stay undiscounted
    rate = discount_rate if settings.discount_tonnes else None
    comparison, abatement = _compare(arrays, years_l, ref, cost_difference, rate,
                                     discount_rate)
    lifecycle = _lifecycle(settings.lifecycle, operations, arrays, ref)
    intensity, intensity_total = _intensities(arrays, years_l)
    settings_out = {
        "diesel_factors": settings.diesel_factors,
        "gwp": settings.gwp,
        "factor_file": str(settings.factor_file) if settings.factor_file else None,
        "grid_mode": "table" if settings.grid_table else "trajectory",
        "hourly_profile": None if settings.hourly_values() is None
        else settings.hourly_profile_kind,
        "market_basis": "supplier" if settings.supplier_intensity is not None
        else "renewable_share" if settings.renewable_share > 0 else "none",
        "tonnes_discounted": rate is not None,
        "discount_rate": rate,
        "lifecycle": lifecycle is not None,
        "residual_mix": settings.residual_mix_intensity is not None,
        "residual_mix_source": settings.residual_mix_source,
        "electricity_upstream_basis": "absolute" if settings.electricity_upstream is not None
        else "share_of_grid",
        "diesel_blend_share": float(settings.diesel_blend_share),
    }
    return EmissionsResult(
        years=years_l, powertrains={op.truck: op.powertrain for op in operations},
        yearly=_tidy(arrays, years_l, LINE_NAMES), totals=_tidy(arrays, years_l, FRAMES),
        intensity=intensity, intensity_total=intensity_total, comparison=comparison,
        abatement=abatement, lifecycle=lifecycle,
        factors=pd.DataFrame(prov, columns=["parameter", "value", "unit", "source", "status"]),
        settings=settings_out, cautions=_cautions(settings, rate, lifecycle is not None) + notes,
        reference=ref,
        biogenic={t: [float(v) for v in np.asarray(a["biogenic_co2"])] for t, a in
                  arrays.items()})


def _tidy(arrays, years: list[int], names: Sequence[str]) -> pd.DataFrame:
    """Long table of yearly values and running totals (line items or frames)."""
    lines = names is LINE_NAMES
    scope_of = {n: (s, b) for n, s, b in LINES}
    rows = []
    for truck, res in arrays.items():
        for name in names:
            cum = np.cumsum(res[name])
            for i, y in enumerate(years):
                extra = scope_of[name] if lines else ()
                rows.append((truck, y, name, *extra, float(res[name][i]), float(cum[i])))
    cols = ["truck", "year", "quantity", "scope", "basis"] if lines \
        else ["truck", "year", "frame"]
    return pd.DataFrame(rows, columns=[*cols, "kg_co2e", "cumulative_kg_co2e"])


def _intensities(arrays, years: list[int]) -> tuple[pd.DataFrame, pd.DataFrame]:
    """Per-year and whole-period intensities per payload-distance and per distance."""
    cols = ["frame", "kg_per_kg_m", "kg_per_m"]
    per_year, whole = [], []
    for truck, res in arrays.items():
        for name in ("ttw", "wtw", "wtw_market"):
            kg, pdist, dist = res[name], res["payload_distance"], res["distance"]
            with np.errstate(divide="ignore", invalid="ignore"):
                a = np.where(pdist > 0, kg / pdist, np.nan)
                b = np.where(dist > 0, kg / dist, np.nan)
            per_year += [(truck, y, name, float(a[i]), float(b[i])) for i, y in enumerate(years)]
            whole.append((truck, name,
                          float(kg.sum() / pdist.sum()) if pdist.sum() > 0 else math.nan,
                          float(kg.sum() / dist.sum()) if dist.sum() > 0 else math.nan))
    return (pd.DataFrame(per_year, columns=["truck", "year", *cols]),
            pd.DataFrame(whole, columns=["truck", *cols]))


def _compare(arrays, years: list[int], ref: str, cost_difference, rate, discount_rate=None):
    """Avoided emissions per year and abatement cost of each truck against the reference."""
    others = [n for n in arrays if n != ref]
    if cost_difference is not None and not isinstance(cost_difference, Mapping):
        if len(others) != 1:
            raise InputError("give the cost difference per truck (a mapping) when more than "
                             "one truck is compared", where="cost_difference")
        cost_difference = {others[0]: float(cost_difference)}
    rows = []
    abatement: dict[str, dict[str, float]] = {}
    w = tonne_weights(len(years), rate)
    for truck in others:
        dc = None if cost_difference is None else cost_difference.get(truck)
        entry = {"cost_difference": math.nan if dc is None else float(dc)}
        for basis, frame in (("location", "wtw"), ("market", "wtw_market")):
            av = arrays[ref][frame] - arrays[truck][frame]
            cum = np.cumsum(av)
            rows += [(truck, ref, y, basis, float(av[i]), float(cum[i]))
                     for i, y in enumerate(years)]
            entry[f"tonnes_{basis}"] = float((av * w).sum() / 1000)
            entry[f"cost_per_tonne_{basis}"] = math.nan if dc is None \
                else abatement_cost(dc, av, rate)
            # both conventions side by side (the discounted one needs a rate)
            entry[f"tonnes_{basis}_undiscounted"] = float(av.sum() / 1000)
            entry[f"cost_per_tonne_{basis}_undiscounted"] = math.nan if dc is None \
                else abatement_cost(dc, av, None)
            if discount_rate is None:
                entry[f"tonnes_{basis}_discounted"] = math.nan
                entry[f"cost_per_tonne_{basis}_discounted"] = math.nan
            else:
                wd = tonne_weights(len(years), discount_rate)
                entry[f"tonnes_{basis}_discounted"] = float((av * wd).sum() / 1000)
                entry[f"cost_per_tonne_{basis}_discounted"] = math.nan if dc is None \
                    else abatement_cost(dc, av, discount_rate)
        abatement[truck] = entry
    comparison = pd.DataFrame(rows, columns=["truck", "reference", "year", "basis",
                                             "avoided_kg", "cumulative_avoided_kg"])
    return comparison, abatement


def _lifecycle(lc, operations, arrays, ref: str) -> pd.DataFrame | None:
    """Manufacturing emissions and payback against the reference (None when off)."""
    if not lc.include:
        return None
    made = {op.truck: float(manufacturing_emissions(
        op.powertrain, op.battery_capacity, lc.vehicle_diesel, lc.vehicle_electric,
        lc.battery)) for op in operations}
    rows = []
    for op in operations:
        if op.truck == ref:
            rows.append((op.truck, made[op.truck], 0.0, math.nan, math.nan))
            continue
        extra = made[op.truck] - made[ref]
        avoided = arrays[ref]["wtw"] - arrays[op.truck]["wtw"]
        d, t = payback(extra, avoided, arrays[op.truck]["distance"])
        rows.append((op.truck, made[op.truck], extra, float(d), float(t)))
    return pd.DataFrame(rows, columns=["truck", "manufacturing_kg", "extra_kg",
                                       "payback_distance_m", "payback_years"])


def _cautions(settings: "EmissionsSettings", rate, lifecycle: bool) -> list[str]:
    """Plain-language cautions for the report, the verification caution first."""
    out = [VERIFY_CAUTION]
    if rate is None:
        out.append("Abatement cost = present-value cost difference ÷ tonnes avoided, not "
                   "discounted (a tonne counts the same in every year); the figure on "
                   "discounted tonnes is shown beside it.")
    else:
        out.append("Abatement cost = present-value cost difference ÷ tonnes avoided "
                   f"discounted at the same {fm.percent(rate)} a year as the costs; the figure on "
                   "undiscounted tonnes is shown beside it.")
    if settings.residual_mix_intensity is not None:
        out.append("Market-based Scope 2: electricity bought without a contractual "
                   "instrument is counted at the residual-mix factor "
                   f"({settings.residual_mix_source}), following the grid's path in "
                   "proportion.")
    elif settings.supplier_intensity is None and settings.renewable_share == 0:
        out.append("The market-based Scope 2 figure equals the location-based one: no "
                   "supplier-specific factor, contracted renewable share or residual-mix "
                   "factor was given (the GHG Protocol Scope 2 Guidance asks for a "
                   "residual-mix factor where one exists).")
    elif settings.supplier_intensity is None:
        out.append("The market-based figure applies the renewable share to the grid average; "
                   "give residual_mix_intensity for the rest, as the GHG Protocol Scope 2 "
                   "Guidance asks.")
    absolute = settings.hourly_values() is not None and settings.hourly_profile_kind == \
        "absolute"
    if "grid_intensity" not in settings.model_fields_set and not settings.grid_table \
            and not absolute:
        out.append("The grid intensity is the shipped default (US EPA eGRID2022 national "
                   "average, CO2 only, at generation); use your grid's figure.")
    if settings.electricity_upstream is None:
        out.append("Upstream emissions of electricity (well-to-tank of the power plants' "
                   f"fuels) are taken as {fm.percent(settings.electricity_upstream_share, 0)} of the grid "
                   "intensity"
                   + (" (a default from memory); give your grid's published figure."
                      if "electricity_upstream_share" not in settings.model_fields_set
                      else "."))
    elif settings.electricity_upstream == 0:
        out.append("Upstream emissions of electricity (fuel supply of power plants) are not "
                   "counted (factor 0) while diesel upstream is: this favours the electric "
                   "truck.")
    if settings.diesel_blend_share > 0:
        out.append(f"The diesel holds {fm.percent(settings.diesel_blend_share, 0)} biodiesel by "
                   "volume: "
                   "its CO2 is biogenic and reported apart, outside the scopes (GHG "
                   "Protocol); the fossil part carries the diesel factors.")
    if "td_loss" not in settings.model_fields_set:
        out.append("The grid loss share is an assumption; use your grid operator's published "
                   "figure, or 0 if the intensity already includes losses.")
    if settings.hourly_values() is not None:
        out.append("Depot charging is matched hour by hour to the hourly intensity profile; "
                   "public charging uses the annual intensity.")
    if lifecycle:
        out.append("The life-cycle add-on (vehicle and battery manufacturing) is outside "
                   "Scopes 1–3 of the operator and is not included in any total above.")
    return out


# --------------------------------------------------------------------------- summary
#: Version of the emissions section's key layout in summary.json
#: (:func:`tco.report.summary_sections.emissions_summary`); raised when a key is renamed
#: or removed.
SUMMARY_SCHEMA = "tco.emissions.summary/1"


__all__ = [
    "DATA_DIR", "SHIPPED_TABLES", "LINES", "LINE_NAMES", "FRAMES", "DieselFactors",
    "EmissionsResult",
    "load_factor_table", "factor_table", "diesel_sets", "gwp_sets", "diesel_factors",
    "gwp_values", "urea_co2", "grid_intensity_path", "hourly_profile_24",
    "hour_matching_factor", "flat_params", "factor_provenance", "compute", "totals",
    "tonne_weights",
    "abatement_cost", "manufacturing_emissions", "payback", "pick_reference", "evaluate",
    "SUMMARY_SCHEMA",
]
