"""The model results as plain JSON-able sections of summary.json: the purchase case
(:func:`cashflow_summary`), the emissions accounting (:func:`emissions_summary`) and the
uncertainty studies (:func:`uncertainty_summary`).

Serialising is the report layer's job: the model modules (:mod:`tco.cashflow`,
:mod:`tco.emissions`, :mod:`tco.uncertainty`) compute results as data classes and pandas
tables; this module names their keys and converts units to the ones in the key names.
"""
from __future__ import annotations

import math
from typing import Any

import numpy as np

from tco import cost_lines
from tco.cashflow import (
    _J_PER_KWH,
    _M3_PER_L,
    _M_PER_KM,
    _M_PER_MILE,
    CashflowResult,
    FinancingResult,
)
from tco.emissions import FRAMES, LINE_NAMES
from tco.emissions import SUMMARY_SCHEMA as EMISSIONS_SUMMARY_SCHEMA
from tco.uncertainty import _EVENTS, UncertaintyResult
from tco.uncertainty import SUMMARY_SCHEMA as UNCERTAINTY_SUMMARY_SCHEMA

__all__ = ["cashflow_summary", "emissions_summary", "financing_rows",
           "uncertainty_summary"]


# --------------------------------------------------------------------------- cash flow
def _num_cf(x) -> float | None:
    return None if x is None or not np.isfinite(x) else float(x)


#: Break-even keys in the summary and the factor from SI to the unit in the key's name.
_BE_KEYS = {
    "diesel_price": ("diesel_price_per_litre", _M3_PER_L),
    "electricity_price": ("electricity_price_per_kwh", _J_PER_KWH),
    "purchase_price": ("purchase_price", 1.0),
    "annual_distance": ("annual_distance_km", 1.0 / _M_PER_KM),
}


def cashflow_summary(result: CashflowResult) -> dict:
    """The purchase case as a JSON-able dict (for summary.json); stable key names.

    Money is in the scenario currency, in the money basis given by ``money_basis``.
    Missing values are ``null`` (never NaN).

    Keys
    ----
    ``money_basis`` (str) "nominal" or "real" · ``discount_rate`` (float, per year) ·
    ``analysis_years`` (int) · ``baseline`` (str, the reference truck's name) ·
    ``lines`` (list of str, all line names in table order) ·
    ``trucks`` (dict by truck name) of:

    - ``powertrain`` (str)
    - ``present_value`` (float) present value of all costs at year 0 [currency]
    - ``undiscounted_total`` (float) sum of yearly net costs [currency]
    - ``levelized_cost_per_km`` / ``levelized_cost_per_mile`` (float) [currency/km, /mi]
    - ``annual_distance_km`` (float) distance in year 1 [km]
    - ``yearly_totals`` (list of float, years 0..N) net cost by year [currency]
    - ``present_value_by_line`` (dict line -> float) [currency]

    ``comparisons`` (list, one per non-baseline truck) of:

    - ``truck``, ``baseline`` (str)
    - ``present_value_difference`` (float) truck − baseline; positive: the truck costs
      more [currency]
    - ``levelized_cost_difference_per_km`` / ``_per_mile`` (float)
    - ``extra_upfront_cost`` (float) year-0 difference [currency]
    - ``simple_payback_year`` / ``discounted_payback_year`` (int or null: not within the
      period) first year from which the cumulative saving stays ≥ 0
    - ``payback_note`` (str, "" when nothing to say)
    - ``irr`` (float or null) IRR of the savings flows per year · ``irr_note`` (str)
    - ``break_even`` (dict) with ``diesel_price_per_litre``, ``electricity_price_per_kwh``
      (charging-profile-weighted depot price), ``purchase_price`` (of this truck),
      ``annual_distance_km`` (of the baseline truck), each ``{"value": float or null,
      "note": str}``

    ``assumptions`` (list of str) statements on how the case was read.

    ``valuation`` (str, schema 1.1) ``"unlevered"`` (default: every truck paid in cash in
    the figures above) or ``"as_financed"``.

    ``financing`` (dict, schema 1.1): loans and leases shown apart from the headline:

    - ``trucks`` (dict by truck name, trucks with a loan or lease only) of ``method``,
      ``cost_of_debt`` (pre-tax, nominal, per year), ``after_tax_cost_of_debt`` (per
      year, money basis of the case), ``flows`` (list, years 0..N: financed minus cash
      net cost) [currency], ``present_value_at_cost_of_debt`` (positive: the loan or
      lease costs more than paying cash) [currency], ``present_value_unlevered`` and
      ``present_value_as_financed`` (at the discount rate; the latter is the equity view)
      [currency]
    - ``comparisons`` (list, one per non-baseline truck) of ``truck``, ``baseline``,
      ``present_value_difference_unlevered``, ``present_value_difference_as_financed``
      [currency], ``irr_unlevered``, ``irr_as_financed`` (per year or null; the latter is
      a return on equity), ``irr_note_unlevered``, ``irr_note_as_financed``

    Parameters
    ----------
    result : CashflowResult

    Returns
    -------
    dict
    """
    totals = result.yearly_totals()
    trucks = {}
    for m in result.trucks:
        trucks[m.name] = {
            "powertrain": m.powertrain,
            "present_value": _num_cf(m.present_value),
            "undiscounted_total": _num_cf(m.undiscounted_total),
            "levelized_cost_per_km": _num_cf(m.levelized_cost * _M_PER_KM),
            "levelized_cost_per_mile": _num_cf(m.levelized_cost * _M_PER_MILE),
            "annual_distance_km": _num_cf(m.annual_distance / _M_PER_KM),
            "yearly_totals": [float(v) for v in totals[m.name]] if m.name in totals
            else [0.0] * (result.analysis_years + 1),
            "present_value_by_line": {k: float(v) for k, v in m.present_value_by_line.items()},
        }
    comps = []
    for c in result.comparisons:
        be = {}
        for q, (key, factor) in _BE_KEYS.items():
            b = c.break_even.get(q)
            if b is None:
                continue
            be[key] = {"value": None if b.value is None else _num_cf(b.value * factor),
                       "note": b.note}
        comps.append({
            "truck": c.truck,
            "baseline": c.baseline,
            "present_value_difference": _num_cf(c.present_value_difference),
            "levelized_cost_difference_per_km": _num_cf(c.levelized_cost_difference * _M_PER_KM),
            "levelized_cost_difference_per_mile": _num_cf(c.levelized_cost_difference
                                                        * _M_PER_MILE),
            "extra_upfront_cost": _num_cf(c.extra_upfront_cost),
            "simple_payback_year": c.simple_payback_year,
            "discounted_payback_year": c.discounted_payback_year,
            "payback_note": c.payback_note,
            "irr": _num_cf(c.irr),
            "irr_note": c.irr_note,
            "break_even": be,
        })
    return {
        "money_basis": result.money_basis,
        "discount_rate": float(result.discount_rate),
        "analysis_years": int(result.analysis_years),
        "baseline": result.baseline,
        "lines": [c.name for c in cost_lines.registry()],
        "trucks": trucks,
        "comparisons": comps,
        "assumptions": list(result.assumptions),
        "valuation": result.valuation,
        "financing": _financing_summary(result.financing),
    }


def _financing_summary(f: FinancingResult | None) -> dict:
    if f is None:
        return {"trucks": {}, "comparisons": []}
    trucks = {t.name: {
        "method": t.method, "cost_of_debt": _num_cf(t.cost_of_debt),
        "after_tax_cost_of_debt": _num_cf(t.after_tax_cost_of_debt),
        "flows": [float(v) for v in t.flows],
        "present_value_at_cost_of_debt": _num_cf(t.present_value_at_cost_of_debt),
        "present_value_unlevered": _num_cf(t.present_value_unlevered),
        "present_value_as_financed": _num_cf(t.present_value_as_financed),
    } for t in f.trucks}
    comps = [{k: (_num_cf(v) if isinstance(v, float) else v) for k, v in c.items()}
             for c in f.comparisons]
    return {"trucks": trucks, "comparisons": comps}


def financing_rows(financing: dict, names: list[str]) -> list[dict]:
    """The rows of the "Financing, shown apart" table, one column per truck, for every
    writer (PDF/HTML and the workbook's Summary sheet), from summary.json's
    ``cashflow.financing`` section.

    Parameters
    ----------
    financing : dict
        ``summary["cashflow"]["financing"]`` (:func:`_financing_summary`).
    names : list of str
        The trucks, in the order of the table's columns.

    Returns
    -------
    list of dict
        ``label`` (no unit), ``key`` (its key under ``cashflow.financing``), ``kind``
        (``"text"``, ``"money"`` [currency] or ``"rate"`` [-/yr]) and ``values``: per truck
        name a number, a text (``"cash"``, ``"baseline"``) or None (does not apply); an
        IRR row also has ``notes``, per truck the reason it has no rate (or None).
    """
    trucks = financing.get("trucks") or {}
    comps = {c["truck"]: c for c in financing.get("comparisons") or []}
    base = {c["baseline"] for c in comps.values()}

    def per_truck(field, transform=lambda v: v):
        return {n: (transform(trucks[n][field]) if n in trucks and trucks[n].get(field)
                    is not None else None) for n in names}

    def per_comparison(field):
        return {n: ("baseline" if n in base else comps[n].get(field) if n in comps
                    else None) for n in names}

    # the value of a loan at its own rate is 0 up to rounding: whole currency units, and
    # never a "-0"
    rows = [
        {"label": "Financing", "key": "trucks.method", "kind": "text",
         "values": {n: trucks[n]["method"] if n in trucks else "cash" for n in names}},
        {"label": "After-tax cost of debt", "key": "trucks.after_tax_cost_of_debt",
         "kind": "rate", "values": per_truck("after_tax_cost_of_debt")},
        {"label": "Loan or lease against paying cash, present value at the after-tax cost "
                  "of debt (positive: costs more)", "key":
         "trucks.present_value_at_cost_of_debt", "kind": "money",
         "values": per_truck("present_value_at_cost_of_debt", lambda v: round(v) + 0.0)},
        {"label": "Present value as financed (equity view)",
         "key": "trucks.present_value_as_financed", "kind": "money",
         "values": per_truck("present_value_as_financed")},
    ]
    if comps:
        rows += [
            {"label": "Present value difference to the baseline, as financed",
             "key": "comparisons.present_value_difference_as_financed", "kind": "money",
             "values": per_comparison("present_value_difference_as_financed")},
            {"label": "IRR of the extra investment, as financed (return on equity)",
             "key": "comparisons.irr_as_financed", "kind": "rate",
             "values": per_comparison("irr_as_financed"),
             "notes": {n: comps[n].get("irr_note_as_financed") if n in comps else None
                       for n in names}},
        ]
    return rows


# --------------------------------------------------------------------------- emissions
_G_PER_TKM = 1e9   # kg/(kg·m) -> g/(t·km)
_G_PER_KM = 1e6    # kg/m -> g/km


def _num_em(x) -> float | None:
    x = float(x)
    return x if math.isfinite(x) else None


def emissions_summary(result) -> dict:
    """The emissions results as plain JSON-able data with stable key names.

    Parameters
    ----------
    result : EmissionsResult or an object whose ``emissions`` attribute is one

    Returns
    -------
    dict
        Keys (stable; ``schema`` changes if any is renamed or removed). Masses in kg CO2e,
        intensities in g CO2e per tonne-km and per km; NaN and infinity become null.

        - ``schema`` : ``"tco.emissions.summary/1"``
        - ``years`` : list of int
        - ``reference`` : name of the reference truck
        - ``settings`` : ``diesel_factors``, ``gwp``, ``factor_file``, ``grid_mode``
          (``trajectory``/``table``), ``hourly_profile`` (null/``shape``/``absolute``),
          ``market_basis`` (``none``/``supplier``/``renewable_share``),
          ``tonnes_discounted`` (bool), ``discount_rate``, ``lifecycle`` (bool)
        - ``trucks`` : ``{name: {...}}`` with

          - ``powertrain``
          - ``total_kg`` : ``{scope_1, scope_2_location, scope_2_market, scope_3_cat3,
            total_location, total_market, ttw, wtt, wtw, wtw_market}`` over all years
          - ``lines_kg`` : ``{<line item>: kg}`` over all years (the items of
            :data:`LINES`)
          - ``g_co2e_per_tkm`` and ``g_co2e_per_km`` : ``{ttw, wtw, wtw_market}`` over all
            years
          - ``yearly`` : ``{year, scope_1, scope_2_location, scope_2_market, scope_3_cat3,
            total_location, total_market, cumulative_total_location,
            cumulative_total_market, biogenic_co2}``, lists in year order [kg]
          - ``biogenic_co2_kg`` (schema 1.1): CO2 of the biodiesel in the diesel blend over
            all years, outside the scopes and frames [kg]

        - ``comparison`` : ``{name: {...}}`` for each truck other than the reference:
          ``avoided_kg_total`` ``{location, market}``, ``avoided_kg_yearly``
          ``{location, market}`` (lists), ``cost_difference`` [currency],
          ``tonnes_avoided`` ``{location, market}`` (discounted if ``tonnes_discounted``),
          ``abatement_cost_per_tonne`` ``{location, market}`` [currency/t CO2e],
          ``tonnes_discounted`` (bool); and both conventions side by side (summary
          schema 1.1): ``tonnes_avoided_discounted``, ``tonnes_avoided_undiscounted``,
          ``abatement_cost_per_tonne_discounted_tonnes``,
          ``abatement_cost_per_tonne_undiscounted_tonnes`` (each ``{location, market}``)
        - ``lifecycle`` : null, or ``{name: {manufacturing_kg, extra_kg,
          payback_distance_km, payback_years}}`` — outside all operational totals
        - ``factors`` : list of ``{parameter, value, unit, source, status}``
        - ``cautions`` : list of str (the first says the figures must be verified)
    """
    r = result.emissions if hasattr(result, "emissions") else result
    out: dict[str, Any] = {"schema": EMISSIONS_SUMMARY_SCHEMA, "years": list(r.years),
                           "reference": r.reference, "settings": dict(r.settings)}
    out["settings"]["discount_rate"] = None if r.settings["discount_rate"] is None \
        else _num_em(r.settings["discount_rate"])
    trucks: dict[str, Any] = {}
    for truck, pt in r.powertrains.items():
        tt = r.totals[r.totals.truck == truck]
        by = {f: tt[tt.frame == f].sort_values("year") for f in FRAMES}
        yl = r.yearly[r.yearly.truck == truck]
        inten = r.intensity_total[r.intensity_total.truck == truck]
        ii = {row.frame: row for row in inten.itertuples(index=False)}
        yearly = {"year": [int(y) for y in by["scope_1"].year]}
        for f in ("scope_1", "scope_2_location", "scope_2_market", "scope_3_cat3",
                  "total_location", "total_market"):
            yearly[f] = [_num_em(v) for v in by[f].kg_co2e]
        yearly["cumulative_total_location"] = [_num_em(v) for v in by["total_location"]
                                               .cumulative_kg_co2e]
        yearly["cumulative_total_market"] = [_num_em(v) for v in by["total_market"]
                                             .cumulative_kg_co2e]
        bio = list(getattr(r, "biogenic", {}).get(truck, []))
        yearly["biogenic_co2"] = [_num_em(v) for v in bio] if bio else [0.0] * len(yearly["year"])
        trucks[truck] = {
            "powertrain": pt,
            "biogenic_co2_kg": _num_em(sum(bio)) if bio else 0.0,
            "total_kg": {f: _num_em(by[f].kg_co2e.sum()) for f in (
                "scope_1", "scope_2_location", "scope_2_market", "scope_3_cat3",
                "total_location", "total_market", "ttw", "wtt", "wtw", "wtw_market")},
            "lines_kg": {n: _num_em(yl[yl.quantity == n].kg_co2e.sum()) for n in LINE_NAMES},
            "g_co2e_per_tkm": {f: _num_em(ii[f].kg_per_kg_m * _G_PER_TKM)
                               for f in ("ttw", "wtw", "wtw_market")},
            "g_co2e_per_km": {f: _num_em(ii[f].kg_per_m * _G_PER_KM)
                              for f in ("ttw", "wtw", "wtw_market")},
            "yearly": yearly,
        }
    out["trucks"] = trucks
    comp: dict[str, Any] = {}
    for truck, ab in r.abatement.items():
        c = r.comparison[r.comparison.truck == truck]
        entry: dict[str, Any] = {"avoided_kg_total": {}, "avoided_kg_yearly": {}}
        for basis in ("location", "market"):
            cb = c[c.basis == basis].sort_values("year")
            entry["avoided_kg_total"][basis] = _num_em(cb.avoided_kg.sum())
            entry["avoided_kg_yearly"][basis] = [_num_em(v) for v in cb.avoided_kg]
        entry["cost_difference"] = _num_em(ab["cost_difference"])
        entry["tonnes_avoided"] = {"location": _num_em(ab["tonnes_location"]),
                                   "market": _num_em(ab["tonnes_market"])}
        entry["abatement_cost_per_tonne"] = {
            "location": _num_em(ab["cost_per_tonne_location"]),
            "market": _num_em(ab["cost_per_tonne_market"])}
        entry["tonnes_discounted"] = bool(r.settings["tonnes_discounted"])
        for conv in ("discounted", "undiscounted"):  # schema 1.1: both conventions
            entry[f"tonnes_avoided_{conv}"] = {
                b: _num_em(ab.get(f"tonnes_{b}_{conv}", math.nan)) for b in ("location", "market")}
            entry[f"abatement_cost_per_tonne_{conv}_tonnes"] = {
                b: _num_em(ab.get(f"cost_per_tonne_{b}_{conv}", math.nan))
                for b in ("location", "market")}
        comp[truck] = entry
    out["comparison"] = comp
    if r.lifecycle is None:
        out["lifecycle"] = None
    else:
        out["lifecycle"] = {
            row.truck: {"manufacturing_kg": _num_em(row.manufacturing_kg),
                        "extra_kg": _num_em(row.extra_kg),
                        "payback_distance_km": _num_em(row.payback_distance_m / 1000),
                        "payback_years": _num_em(row.payback_years)}
            for row in r.lifecycle.itertuples(index=False)}
    out["factors"] = [
        {"parameter": str(f.parameter),
         "value": _num_em(f.value),
         "unit": str(f.unit), "source": str(f.source), "status": str(f.status)}
        for f in r.factors.itertuples(index=False)]
    out["cautions"] = list(r.cautions)
    return out


# --------------------------------------------------------------------------- uncertainty
def _num_un(x) -> float | None:
    if x is None:
        return None
    x = float(x)
    return x if math.isfinite(x) else None


def uncertainty_summary(result: UncertaintyResult | None) -> dict | None:
    """The uncertainty results as JSON-able data with stable key names (for summary.json).

    Money is in the scenario currency and money basis; NaN and infinity become null.

    Parameters
    ----------
    result : UncertaintyResult or None
        None (studies switched off) gives None.

    Returns
    -------
    dict
        Keys (stable; ``schema`` changes if one is renamed or removed):

        - ``schema`` : ``"tco.uncertainty.summary/1"``
        - ``baseline`` : name of the reference truck (differences are truck − baseline)
        - ``draws`` (int, 0 when the Monte Carlo did not run), ``seed`` (int),
          ``default_swing`` (share, e.g. 0.2)
        - ``notes`` : list of str
        - ``tornado`` : ``{truck: [bar, ...]}`` widest swing first; each bar ``{key,
          input, unit, base_value, low_value, high_value, low, high, swing, source}`` —
          values of the input in ``unit`` (its documented unit; ``×`` a factor on the
          scenario's values), ``low``/``high`` the present-value difference with the input
          at that value [currency], ``swing`` = |high − low| [currency]; ``source``
          says where the range comes from: ``user`` (a tornado entry), ``P10–P90 of its
          distribution`` (the Monte Carlo's), ``default ±20%``, or a depot setting
        - ``tornado_emissions`` : the same for the emissions avoided (well-to-wheel,
          location-based, over the period): ``low``/``high``/``swing`` in t CO2e
        - ``base`` : ``{truck: {present_value_difference [currency],
          levelized_cost_difference_per_km [currency/km], discounted_payback_year (int or
          null: not within the period), avoided_kg_location, avoided_kg_market [kg]}}``
        - ``break_even`` : ``{truck: [{key, input, unit, value, base_value, factor,
          note}, ...]}`` — ``value`` null with the reason in ``note`` ("none in range
          (…)") when there is none
        - ``inputs`` : list of ``{key, input, kind, scale, unit, base_value, parameters}``
          (parameters converted: SI values or factors)
        - ``correlations`` : list of ``{a, b, rank, pearson, achieved_rank}``
        - ``monte_carlo`` : ``{truck: {...}}`` (empty when not run), each with

          - ``present_value_difference`` : ``{mean, sd, p10, p50, p90}`` [currency]
          - ``levelized_cost_per_km``, ``baseline_levelized_cost_per_km``,
            ``levelized_cost_difference_per_km`` (and ``…_per_mile``) : ``{mean, sd, p10,
            p50, p90}`` [currency/km, currency/mi]
          - ``simple_payback_year``, ``discounted_payback_year`` : ``{p10, p50, p90}``
            (whole years; null = not within the period)
          - ``probability_cheaper`` : share of draws with ΔPV < 0, and
            ``probability_cheaper_standard_error``
          - ``probability_pays_back`` : ``{simple, discounted}`` within the period
          - ``avoided_kg`` : ``{location, market}`` each ``{mean, sd, p10, p50, p90}``
            [kg CO2e over the period, well-to-wheel, baseline − truck]
          - ``probability_avoids_emissions`` : ``{location, market}`` (share of draws with
            avoided > 0)
    """
    if result is None:
        return None

    def stat(df, q, factor=1.0, moments=True):
        r = df[df.quantity == q]
        if not len(r):
            return None
        r = r.iloc[0]
        out = {k: _num_un(r[k] * factor) for k in ("p10", "p50", "p90")}
        if not moments:  # payback years: whole years or null
            return {k: None if v is None else int(v) for k, v in out.items()}
        return {"mean": _num_un(r["mean"] * factor), "sd": _num_un(r["sd"] * factor), **out}

    def bars(table):
        out = {}
        for t in result.trucks:
            rows = table[table.truck == t]
            out[t] = [{"key": r.key, "input": r.input, "unit": r.unit,
                       "base_value": _num_un(r.base_value), "low_value": _num_un(r.low_value),
                       "high_value": _num_un(r.high_value), "low": _num_un(r.low),
                       "high": _num_un(r.high), "swing": _num_un(r.swing), "source": r.source}
                      for r in rows.itertuples(index=False)]
        return out

    tor = bars(result.tornado)
    tor_em = bars(result.tornado_emissions)
    be = {t: [{"key": r.key, "input": r.input, "unit": r.unit, "value": _num_un(r.value),
               "base_value": _num_un(r.base_value), "factor": _num_un(r.factor), "note": r.note}
              for r in result.break_even[result.break_even.truck == t].itertuples(index=False)]
          for t in result.trucks}
    base = {}
    for r in result.base.to_dict("records"):
        dp = r.get("discounted_payback_year")
        base[r["truck"]] = {
            "present_value_difference": _num_un(r["present_value_difference"]),
            "levelized_cost_difference_per_km": _num_un(r["levelized_cost_difference"]
                                                     * _M_PER_KM),
            "discounted_payback_year": int(dp) if dp is not None and math.isfinite(dp)
            else None,
            "avoided_kg_location": _num_un(r.get("avoided_kg_location")),
            "avoided_kg_market": _num_un(r.get("avoided_kg_market")),
        }
    mc = {}
    if result.draws:
        for t in result.trucks:
            s = result.statistics[result.statistics.truck == t]
            p = result.probabilities[result.probabilities.truck == t].set_index("event")
            prob = p.probability.to_dict()
            prob = {e: _num_un(prob.get(e)) for e in _EVENTS}
            entry = {"present_value_difference": stat(s, "present_value_difference")}
            for q in ("levelized_cost", "baseline_levelized_cost", "levelized_cost_difference"):
                entry[f"{q}_per_km"] = stat(s, q, _M_PER_KM)
                entry[f"{q}_per_mile"] = stat(s, q, _M_PER_MILE)
            entry["simple_payback_year"] = stat(s, "simple_payback_year", moments=False)
            entry["discounted_payback_year"] = stat(s, "discounted_payback_year",
                                                    moments=False)
            entry["probability_cheaper"] = prob["cheaper"]
            entry["probability_cheaper_standard_error"] = _num_un(
                p.standard_error.get("cheaper"))
            entry["probability_pays_back"] = {"simple": prob["pays_back_simple"],
                                              "discounted": prob["pays_back_discounted"]}
            entry["avoided_kg"] = {"location": stat(s, "avoided_kg_location"),
                                   "market": stat(s, "avoided_kg_market")}
            entry["probability_avoids_emissions"] = {
                "location": prob["avoids_emissions_location"],
                "market": prob["avoids_emissions_market"]}
            mc[t] = entry
    return {
        "schema": UNCERTAINTY_SUMMARY_SCHEMA,
        "baseline": result.baseline,
        "draws": int(result.draws),
        "seed": int(result.seed),
        "default_swing": float(result.default_swing),
        "notes": list(result.notes),
        "tornado": tor,
        "tornado_emissions": tor_em,
        "base": base,
        "break_even": be,
        "inputs": [{"key": r["key"], "input": r["input"], "kind": r["kind"],
                    "scale": r["scale"], "unit": r["unit"], "base_value": _num_un(r["base_value"]),
                    "parameters": {k: _num_un(v) for k, v in r["parameters"].items()}}
                   for r in result.inputs.to_dict("records")],
        "correlations": [{"a": r["a"], "b": r["b"], "rank": _num_un(r["rank"]),
                          "pearson": _num_un(r["pearson"]),
                          "achieved_rank": _num_un(r["achieved_rank"])}
                         for r in result.correlations.to_dict("records")],
        "monte_carlo": mc,
    }
