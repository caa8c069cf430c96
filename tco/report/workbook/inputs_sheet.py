"""The Inputs sheet: named inputs, derived inputs, the scenario field table."""
from __future__ import annotations

import math
import re

import numpy as np
from openpyxl.workbook.defined_name import DefinedName

from tco.report import workbook_base as wbb
from tco.report.workbook_base import safe_text, write_value
from tco.report.workbook._common import (
    _AS_WRITTEN_COL,
    _FIELD_COL,
    _FIELD_FACTOR_COL,
    _DERIVED_FILL,
    _FACTOR,
    _IN,
    _J_PER_KWH,
    _M3_PER_L,
    _M_PER_KM,
    _NOT_LIVE,
    _RATE,
    _S_PER_H,
    _WRAP,
    _W_PER_KW,
    _col,
    _section,
)


class InputsSheet:
    """The Inputs sheet: named inputs, derived inputs, the scenario field table.

    A mixin of :class:`tco.report.workbook.book.Book`: it reads and writes the state the
    book shares (the result, the sheets, the row maps).
    """

    # ------------------------------------------------------------------------ Inputs
    def _inp(self, name, label, value, unit, source, fmt=None, field=None) -> str:
        wbb.add_named_input(self.wb, self.ws_in, self.row, name, label, value, unit, source,
                            number_format=fmt)
        # hidden columns: the value as written, and the scenario field it shows with the
        # factor to the field table's unit. A rerun from this workbook reads an edited
        # named input into its field (one source of truth: the cell the formulas read); a
        # model figure (no field) edited here is refused with a line naming the cell.
        write_value(self.ws_in.cell(row=self.row, column=_AS_WRITTEN_COL), value)
        seen = getattr(self, "_src_seen", None)
        if field is None and seen is not None and seen[1] == source:
            field = seen[0]
        self._src_seen = None
        factor = self._field_factor(field, value, unit) if field else None
        if factor is not None:
            safe_text(self.ws_in.cell(row=self.row, column=_FIELD_COL), field)
            write_value(self.ws_in.cell(row=self.row, column=_FIELD_FACTOR_COL), factor)
        self.row += 1
        return name

    def _field_factor(self, field: str, shown, unit: str) -> float | None:
        """Factor from a named input's value as shown to the field table's number: the
        field value of an edit is the shown value × factor. None when the field is not a
        number. A quantity field (``Qty``) is read in its unit and held in SI; the others
        (money, counts, years) are held as written."""
        import typing

        from pydantic import BeforeValidator

        from tco.units import to_si

        parts = re.findall(r"[^.\[\]]+|\[[0-9]+\]", field)
        node, info = self.s, None
        try:
            for part in parts:
                if part.startswith("["):
                    node = node[int(part[1:-1])]
                else:
                    info = type(node).model_fields[part]
                    node = getattr(node, part)
        except (AttributeError, IndexError, KeyError, TypeError):
            return None
        if info is None or isinstance(node, bool) or not isinstance(
                node, (int, float, type(None))) or isinstance(shown, bool):
            return None

        def is_qty(ann, meta=()) -> bool:
            if any(isinstance(m, BeforeValidator) for m in meta):
                return True
            return any(is_qty(a, getattr(a, "__metadata__", ()))
                       for a in typing.get_args(ann))

        unit_of = (info.json_schema_extra or {}).get("unit", "") \
            if isinstance(info.json_schema_extra, dict) else ""
        try:  # what one field-table number is, as the scenario holds it
            per_unit = to_si(1.0, unit_of) if is_qty(info.annotation, info.metadata) \
                else 1.0
        except Exception:  # noqa: BLE001 - a unit pint does not read: no link
            return None
        if node is not None and node != 0 and shown:  # 15 digits: 1.0000000000000002 → 1
            return float(f"{float(node) / float(shown) / per_unit:.15g}")
        try:  # a zero value: the factor from the unit shown (the currency counts 1)
            shown_si = to_si(1.0, unit.replace(self.cur, "1").replace("-", "1")
                             .replace(" per month", "/month")) if per_unit != 1.0 else 1.0
        except Exception:  # noqa: BLE001 - a unit pint does not read: no link
            return None
        return float(f"{shown_si / per_unit:.15g}")

    def _derived(self, name, label, formula, unit, fmt=None) -> str:
        """A named formula cell on the Inputs sheet (derived from inputs above it)."""
        ws, r = self.ws_in, self.row
        wbb.check_name(name)
        safe_text(ws.cell(row=r, column=1), label).alignment = _WRAP
        safe_text(ws.cell(row=r, column=2), name)
        c = ws.cell(row=r, column=3, value="=" + formula)
        c.fill = _DERIVED_FILL
        if fmt:
            c.number_format = fmt
        safe_text(ws.cell(row=r, column=4), unit)
        safe_text(ws.cell(row=r, column=5), "formula (derived): " + formula).alignment = _WRAP
        self._define(name, r, r)
        self.derived_f[name] = formula
        self.row += 1
        return name

    def _define(self, name: str, r0: int, r1: int) -> None:
        ref = f"'{_IN}'!$C${r0}" if r0 == r1 else f"'{_IN}'!$C${r0}:$C${r1}"
        self.wb.defined_names[name] = DefinedName(name, attr_text=ref)

    def _range(self, name, labels, values, unit, source, fmt=None, index_name=None,
               field=None) -> None:
        """Several values under one range name (column C), optional index name (col F).
        ``field``: the scenario list field the values are (a rerun reads them into it)."""
        ws = self.ws_in
        wbb.check_name(name)
        self._src_seen = None
        r0 = self.row
        for k, (label, v) in enumerate(zip(labels, values)):
            r = self.row
            safe_text(ws.cell(row=r, column=1), label)
            safe_text(ws.cell(row=r, column=2), f"{name} [{k + 1}]")
            write_value(ws.cell(row=r, column=3), float(v), fmt).fill = wbb.INPUT_FILL
            write_value(ws.cell(row=r, column=_AS_WRITTEN_COL), float(v))
            if field:
                safe_text(ws.cell(row=r, column=_FIELD_COL), f"{field}[{k}]")
                write_value(ws.cell(row=r, column=_FIELD_FACTOR_COL), 1.0)
            safe_text(ws.cell(row=r, column=4), unit)
            safe_text(ws.cell(row=r, column=5), source).alignment = _WRAP
            if index_name:
                ws.cell(row=r, column=6, value=k + 1)
            self.row += 1
        self._define(name, r0, self.row - 1)
        if index_name:
            wbb.check_name(index_name)
            self.wb.defined_names[index_name] = DefinedName(
                index_name, attr_text=f"'{_IN}'!$F${r0}:$F${self.row - 1}")

    def _info(self, label, value, unit, source) -> None:
        """An input row without a name (a choice that fixes the structure)."""
        self._src_seen = None
        ws, r = self.ws_in, self.row
        safe_text(ws.cell(row=r, column=1), label).alignment = _WRAP
        safe_text(ws.cell(row=r, column=2), "(structure)")
        write_value(ws.cell(row=r, column=3), value)
        safe_text(ws.cell(row=r, column=4), unit)
        safe_text(ws.cell(row=r, column=5), source).alignment = _WRAP
        self.row += 1

    def _sec(self, text: str) -> None:
        self.row += 1
        _section(self.ws_in, self.row, text)
        self.row += 1

    def _inputs_sheet(self) -> None:
        ws, p, cur = self.ws_in, self.params, self.cur
        wbb.input_header(ws)
        wbb.set_widths(ws, {"D": 17, "F": 8})  # "EUR/kW per month" fits
        self.row = 2
        f = self.inputs.finance
        src = self.source

        self._sec("Study and finance")
        self._info("Money basis", f.money_basis, "", src("finance.money_basis")
                   + ("; real: escalations and the discount rate are above inflation, flows "
                      "in money of year 0" if self.real else ""))
        self._inp("analysis_years", "Analysis period (structure: the Cash flow sheet has one "
                  "column per year; re-run the tool to change it)", self.N, "yr",
                  src("finance.analysis_years"), wbb.INTEGER)
        self._inp("discount_rate", "Discount rate per year", p["finance.discount_rate"], "-",
                  src("finance.discount_rate"), _RATE)
        self._inp("inflation", "General inflation per year (used when the money basis is "
                  "real)", p["finance.inflation"], "-", src("finance.inflation"), _RATE)
        self._inp("days_per_year", "Operating days per year", p["route.days_per_year"], "d/yr",
                  src("route.days_per_year"), wbb.ENERGY)
        self._inp("trips_per_day", "Trips per operating day (extra trips not counted)",
                  p["route.trips_per_day"], "1/d", src("route.trips_per_day"), "0.00")
        self._inp("driver_cost_per_hour", "Driver cost per hour",
                  p["finance.driver_cost_per_hour"] * _S_PER_H, f"{cur}/h",
                  src("finance.driver_cost_per_hour"), wbb.MONEY_CENTS)
        self._inp("driver_cost_escalation", "Driver cost, change per year",
                  p["finance.driver_cost_escalation"], "-/yr",
                  src("finance.driver_cost_escalation"), _RATE)
        at = f.after_tax
        if at.enabled:
            self._inp("tax_rate", "Income tax rate", p["finance.after_tax.tax_rate"], "-",
                      src("finance.after_tax.tax_rate"), _RATE)
            self._info("Tax depreciation method", at.depreciation, "",
                       src("finance.after_tax.depreciation"))
            self._info("Operating costs deductible", "yes" if at.deduct_operating_costs
                       else "no", "", src("finance.after_tax.deduct_operating_costs"))
            from tco import finance as fin

            fr = fin.depreciation_fractions(at.depreciation, at.depreciation_years,
                                            at.declining_balance_percent, at.macrs_class)
            how = {"straight_line": f"straight line over {at.depreciation_years} years",
                   "declining_balance": f"{at.declining_balance_percent} % declining balance "
                                        f"over {at.depreciation_years} years, switching to "
                                        "straight line",
                   "macrs": f"MACRS GDS {at.macrs_class}-year class, half-year convention "
                            "(IRS Publication 946, Table A-1)"}[at.depreciation]
            self._range("tax_depreciation_fractions",
                        [f"Truck tax depreciation, tax year {k + 1}" for k in range(len(fr))],
                        fr, "-", f"{_NOT_LIVE}: {how}", _RATE,
                        index_name="tax_depreciation_years")

        self._sec(f"Prices (today's prices, {cur})")
        if not math.isnan(p["prices.diesel"]):
            self._inp("diesel_price", "Diesel price", p["prices.diesel"] * _M3_PER_L,
                      f"{cur}/L", src("prices.diesel"), wbb.MONEY_CENTS)
        if not math.isnan(p["prices.diesel_exhaust_fluid"]):
            self._inp("def_price", "Diesel exhaust fluid price",
                      p["prices.diesel_exhaust_fluid"] * _M3_PER_L, f"{cur}/L",
                      src("prices.diesel_exhaust_fluid"), wbb.MONEY_CENTS)
        if not math.isnan(p["prices.public_charging"]):
            self._inp("public_charging_price", "Public charging price",
                      p["prices.public_charging"] * _J_PER_KWH, f"{cur}/kWh",
                      src("prices.public_charging"), "0.0000")
        tariff = self.inputs.prices.electricity
        if not math.isnan(p["prices.electricity.energy_price"]):
            self._inp("elec_energy_price", "Depot electricity, hours outside every band",
                      p["prices.electricity.energy_price"] * _J_PER_KWH, f"{cur}/kWh",
                      src("prices.electricity.energy_price"), "0.0000")
        for j, band in enumerate(tariff.bands):
            hours = ", ".join(str(h) for h in band.hours)
            self._inp(f"elec_band{j + 1}_price", f"Depot electricity, band {j + 1} "
                      f"'{band.name}' (hours {hours})",
                      p[f"prices.electricity.bands[{j}].price"] * _J_PER_KWH, f"{cur}/kWh",
                      src(f"prices.electricity.bands[{j}].price"), "0.0000")
        self._inp("demand_charge", "Depot demand charge per kW of monthly peak",
                  p["prices.electricity.demand_charge"] * _W_PER_KW, f"{cur}/kW per month",
                  src("prices.electricity.demand_charge"), wbb.MONEY_CENTS)
        self._inp("fixed_fee", "Depot meter fixed fee", p["prices.electricity.fixed_fee"],
                  f"{cur}/month", src("prices.electricity.fixed_fee"), wbb.MONEY_CENTS)
        for key, name, label in (("diesel", "esc_diesel", "Diesel price"),
                                 ("diesel_exhaust_fluid", "esc_def", "Diesel exhaust fluid "
                                  "price"),
                                 ("electricity", "esc_electricity", "Depot electricity "
                                  "(energy, demand, fixed)"),
                                 ("public_charging", "esc_public_charging", "Public charging "
                                  "price"),
                                 ("equipment", "esc_equipment", "Depot charger cost and "
                                  "maintenance")):
            self._inp(name, f"{label}, change per year", p[f"prices.escalation.{key}"], "-/yr",
                      src(f"prices.escalation.{key}"), _RATE)

        self._sec("Depot charging (costs shared equally by the trucks it serves)")
        dp = "depot."
        d = self.inputs.depot
        self._inp("depot_chargers", "Number of depot chargers (structure)", d.chargers, "-",
                  src(dp + "chargers"), wbb.INTEGER)
        self._inp("depot_charger_power_kw", "Rated power of one charger (0: no cap)",
                  p[dp + "charger_power"] / _W_PER_KW, "kW", src(dp + "charger_power"),
                  wbb.ENERGY)
        self._inp("depot_hardware_cost", "Hardware cost of one charger",
                  p[dp + "hardware_cost"], cur, src(dp + "hardware_cost"), wbb.MONEY)
        self._inp("depot_installation_cost", "Installation cost of one charger",
                  p[dp + "installation_cost"], cur, src(dp + "installation_cost"), wbb.MONEY)
        self._inp("depot_grid_connection_cost", "Grid connection of the depot, once",
                  p[dp + "grid_connection_cost"], cur, src(dp + "grid_connection_cost"),
                  wbb.MONEY)
        self._inp("depot_life", "Life of the charger hardware", d.life, "yr", src(dp + "life"),
                  wbb.INTEGER)
        self._inp("depot_residual_share", "Hardware value at the end of its life, share of "
                  "its cost", p[dp + "residual_share"], "-", src(dp + "residual_share"), _RATE)
        self._inp("depot_maintenance_per_year", "Maintenance of one charger per year",
                  p[dp + "maintenance_per_year"], f"{cur}/yr", src(dp + "maintenance_per_year"),
                  wbb.MONEY)
        self._inp("depot_trucks_served", "Trucks sharing the depot's costs", self.served, "-",
                  src(dp + "trucks_served") if d.trucks_served else
                  "default: the electric trucks of the scenario that charge at the depot",
                  wbb.INTEGER, field=dp + "trucks_served")

        for i in range(len(self.trucks)):
            self._truck_inputs(i)
        self._emission_inputs()
        self._all_fields()

    def _truck_inputs(self, i: int) -> None:
        p, cur, P = self.params, self.cur, self.pre(i)
        t = self.inputs.trucks[i]
        op = self.ops[i]
        c = t.costs
        fpath = f"trucks[{i}].costs."
        src = self.source
        g = lambda k: p[fpath + k]  # noqa: E731
        self._sec(f"Truck {i + 1}: {t.name} ({t.powertrain})"
                  + (" — baseline" if i == self.ref else ""))
        self._inp(P + "purchase_price", "Purchase price before taxes and fees",
                  g("purchase_price"), cur, src(fpath + "purchase_price"), wbb.MONEY)
        self._inp(P + "purchase_tax_rate", "Purchase tax, share of the price",
                  g("purchase_tax_rate"), "-", src(fpath + "purchase_tax_rate"), _RATE)
        self._inp(P + "purchase_fees", "Fees at purchase", g("purchase_fees"), cur,
                  src(fpath + "purchase_fees"), wbb.MONEY)
        self._inp(P + "grant", "Grant paid at purchase", g("grant"), cur, src(fpath + "grant"),
                  wbb.MONEY)
        self._inp(P + "tax_credit", "Tax credit", g("tax_credit"), cur,
                  src(fpath + "tax_credit"), wbb.MONEY)
        self._inp(P + "tax_credit_year", "Year the tax credit is received", c.tax_credit_year,
                  "yr", src(fpath + "tax_credit_year"), wbb.INTEGER)
        fi = c.financing
        self._info("Financing", fi.method, "", src(fpath + "financing.method"))
        if fi.method != "cash":
            from tco.cashflow import headline_method

            self._info("Paid for in the Cash flow sheet (finance.valuation)",
                       headline_method(self.inputs.finance, c), "", src("finance.valuation"))
        if fi.method == "loan":
            self._inp(P + "loan_rate", "Loan interest rate per year (nominal)",
                      g("financing.loan_rate"), "-", src(fpath + "financing.loan_rate"), _RATE)
            self._inp(P + "loan_years", "Loan term", fi.loan_years, "yr",
                      src(fpath + "financing.loan_years"), wbb.INTEGER)
            self._inp(P + "down_payment", "Down payment, share of the amount due",
                      g("financing.down_payment_share"), "-",
                      src(fpath + "financing.down_payment_share"), _RATE)
            self._inp(P + "payments_per_year", "Loan instalments per year",
                      fi.payments_per_year, "1/yr", src(fpath + "financing.payments_per_year"),
                      wbb.INTEGER)
            self._derived(P + "loan_amount", "Amount borrowed: (price + taxes and fees − "
                          "grant, at least 0) × (1 − down payment)",
                          f"MAX({P}purchase_price+({P}purchase_price*{P}purchase_tax_rate"
                          f"+{P}purchase_fees)-{P}grant,0)*(1-{P}down_payment)", cur,
                          wbb.MONEY)
            if fi.loan_years > self.N:
                self._info("Loan beyond the period", fi.beyond_period, "",
                           src(fpath + "financing.beyond_period"))
        elif fi.method == "lease":
            self._inp(P + "lease_payment", "Lease payment per month",
                      g("financing.lease_payment"), f"{cur}/month",
                      src(fpath + "financing.lease_payment"), wbb.MONEY)
            self._inp(P + "lease_upfront", "Lease payment at signing",
                      g("financing.lease_upfront"), cur, src(fpath + "financing.lease_upfront"),
                      wbb.MONEY)
            self._inp(P + "lease_years", "Lease term", fi.lease_years, "yr",
                      src(fpath + "financing.lease_years"), wbb.INTEGER)
            self._info("At the end of the lease", fi.lease_end, "",
                       src(fpath + "financing.lease_end"))
            self._info("Lease beyond the period", fi.beyond_period, "",
                       src(fpath + "financing.beyond_period"))
            self._inp(P + "lease_buyout_price", "Lease buy-out price",
                      g("financing.lease_buyout_price"), cur,
                      src(fpath + "financing.lease_buyout_price"), wbb.MONEY)
        for k, label in (("maintenance", "Maintenance and repair"), ("tyres", "Tyres"),
                         ("tolls", "Road tolls")):
            self._inp(f"{P}{k}_per_km", f"{label} per km", g(k) * _M_PER_KM, f"{cur}/km",
                      src(fpath + k), "0.0000")
        self._inp(P + "insurance_rate", "Insurance per year, share of the value at the start "
                  "of the year", g("insurance_rate"), "-", src(fpath + "insurance_rate"), _RATE)
        self._inp(P + "insurance_fixed", "Insurance per year, fixed part", g("insurance_fixed"),
                  f"{cur}/yr", src(fpath + "insurance_fixed"), wbb.MONEY)
        self._inp(P + "registration", "Registration and road taxes per year",
                  g("registration"), f"{cur}/yr", src(fpath + "registration"), wbb.MONEY)
        r = c.residual
        if r.method == "declining_balance":
            self._inp(P + "residual_rate", "Loss of value per year (declining balance: value "
                      "share at age a = (1 − rate)^a)", g("residual.rate"), "-",
                      src(fpath + "residual.rate"), _RATE)
        else:
            self._range(P + "residual_shares",
                        [f"Value at the end of year of age {k + 1}, share of the price"
                         for k in range(len(r.shares))],
                        [g(f"residual.shares[{k}]") for k in range(len(r.shares))], "-",
                        src(fpath + "residual.shares") + " (later ages keep the last share)",
                        _RATE, field=fpath + "residual.shares")
        for k in ("maintenance", "tyres", "tolls", "insurance", "registration", "battery"):
            self._inp(f"{P}esc_{k}", f"{k.capitalize()} cost, change per year",
                      g(f"escalation.{k}"), "-/yr", src(fpath + f"escalation.{k}"), _RATE)
        b = c.battery_replacement
        if b.when != "never" and op.battery_capacity > 0:
            self._info("Battery replacement", b.when, "", src(fpath + "battery_replacement.when"))
            self._inp(P + "battery_cost", "Battery replacement, fixed part",
                      g("battery_replacement.cost"), cur, src(fpath + "battery_replacement.cost"),
                      wbb.MONEY)
            self._inp(P + "battery_cost_per_kwh", "Battery replacement per kWh of capacity",
                      g("battery_replacement.cost_per_kwh") * _J_PER_KWH, f"{cur}/kWh",
                      src(fpath + "battery_replacement.cost_per_kwh"), wbb.MONEY_CENTS)
            if b.when == "year":
                self._inp(P + "battery_year", "Year of the battery replacement", b.year, "yr",
                          src(fpath + "battery_replacement.year"), wbb.INTEGER)
            self._info("Credit the unused battery life at the end",
                       "yes" if b.credit_remaining_life else "no", "",
                       src(fpath + "battery_replacement.credit_remaining_life"))

        # named inputs a cost line declares (tco.cost_lines.CostLine.inputs)
        from tco import cost_lines

        for spec in cost_lines.registry():
            for si in spec.inputs:
                path = si.field.format(i=i)
                if path not in p or P + si.name in self.wb.defined_names:
                    continue  # a truck without the field, or written above
                unit = si.unit.format(cur=cur)
                self._inp(P + si.name, si.label, p[path] * si.factor, unit, src(path),
                          wbb.MONEY if unit.startswith(cur) else "0.0000", field=path)

        # yearly operation as modelled (first year), and its scale
        model = ("model: energy simulation of the duty cycle, scaled to the operating year "
                 "(tco.energy, tco.operation)")
        _section(self.ws_in, self.row, f"Truck {i + 1}: {t.name}, yearly operation as "
                 "modelled", col=1)
        self.row += 1
        self._inp(P + "operating_days", "Operating days per year the operation was modelled "
                  "with", op.operating_days, "d/yr", model, wbb.ENERGY)
        base_tpd = (op.trips - op.extra_trips) / op.operating_days
        self._inp(P + "base_trips_per_day", "Trips per day the operation was modelled with "
                  "(extra trips not counted)", base_tpd, "1/d", model, "0.00")
        self._inp(P + "distance_km", "Distance per year", op.distance / _M_PER_KM, "km/yr",
                  model, wbb.ENERGY)
        self._inp(P + "diesel_L", "Diesel per year", op.diesel_volume / _M3_PER_L, "L/yr", model,
                  wbb.ENERGY)
        self._inp(P + "def_L", "Diesel exhaust fluid per year", op.def_volume / _M3_PER_L,
                  "L/yr", model, wbb.ENERGY)
        self._inp(P + "battery_kwh", "Battery net throughput per year (discharge less "
                  "regeneration)", op.battery_energy / _J_PER_KWH, "kWh/yr", model, wbb.ENERGY)
        if op.battery_capacity > 0:
            self._inp(P + "battery_discharge_kwh", "Battery energy discharged per year (the "
                      "wear basis: regeneration not netted)",
                      op.battery_discharge_energy / _J_PER_KWH, "kWh/yr", model, wbb.ENERGY)
            self._inp(P + "calendar_fade", "Battery state of health lost per year with time "
                      "alone", op.calendar_fade, "1/yr",
                      src(f"trucks[{i}].electric.calendar_fade"), _RATE)
            self._inp(P + "eol_soh", "Battery state of health at end of life",
                      op.eol_state_of_health, "-",
                      src(f"trucks[{i}].electric.eol_state_of_health"), _RATE)
        self._inp(P + "depot_kwh", "Depot electricity at the meter per year",
                  op.grid_energy_depot / _J_PER_KWH, "kWh/yr", model, wbb.ENERGY)
        self._band_inputs(i)
        self._inp(P + "public_kwh", "Public charging electricity per year",
                  op.grid_energy_public / _J_PER_KWH, "kWh/yr", model, wbb.ENERGY)
        self._inp(P + "charging_time_h", "Driver time at en-route chargers per year",
                  op.charging_time_lost / _S_PER_H, "h/yr", model, "0.00")
        if self._aged(i):
            self._ageing_inputs(i)
        self._inp(P + "extra_trips", "Extra trips per year (lower payload)", op.extra_trips,
                  "1/yr", model, "0.00")
        self._inp(P + "trip_duration_h", "Duration of one trip (not scaled)",
                  op.trip_duration / _S_PER_H, "h", model, "0.000")
        self._inp(P + "depot_peak_kw", "Peak depot charging power (not scaled)",
                  op.depot_charging_power / _W_PER_KW, "kW", model, wbb.ENERGY)
        self._inp(P + "battery_capacity_kwh", "Nominal battery capacity",
                  op.battery_capacity / _J_PER_KWH, "kWh", model, wbb.ENERGY)
        if math.isfinite(op.battery_cycle_life):
            self._inp(P + "battery_cycle_life", "Battery cycle life (full equivalent cycles)",
                      op.battery_cycle_life, "-", model, wbb.INTEGER)
        self._inp(P + "payload_tkm", "Payload × distance per year",
                  op.payload_distance / 1e6, "t·km/yr", model, wbb.ENERGY)
        if base_tpd > 0:
            self._derived(P + "scale", "Scale of the yearly cost quantities: days per year ÷ "
                          "modelled days × trips per day ÷ modelled trips per day",
                          f"days_per_year/{P}operating_days*(trips_per_day/"
                          f"{P}base_trips_per_day)", "-", _FACTOR)
        else:
            self._derived(P + "scale", "Scale of the yearly cost quantities: days per year ÷ "
                          "modelled days", f"days_per_year/{P}operating_days", "-", _FACTOR)
        if (c.battery_replacement.when == "cycles" or self._aged(i)) \
                and op.battery_capacity > 0:
            thru = "battery_discharge_kwh" if op.battery_discharge_energy > 0 \
                else "battery_kwh"
            cyc = (f"{P}{thru}*{P}scale/{P}battery_capacity_kwh/{P}battery_cycle_life+"
                   if math.isfinite(op.battery_cycle_life) else "")
            self._derived(P + "battery_lives_per_year", "Battery lives used per year: "
                          "discharged energy ÷ capacity ÷ cycle life + calendar fade ÷ "
                          "(1 − end-of-life state of health)",
                          f"{cyc}{P}calendar_fade/(1-{P}eol_soh)", "1/yr", _FACTOR)

    def _ageing_inputs(self, i: int) -> None:
        """The operating day's battery figures the live ageing rows read (Cash flow sheet,
        tco.report.workbook.ageing_rows): model values of the simulated day."""
        P, op = self.pre(i), self.ops[i]
        tr = list(self.result.trucks.values())[i]
        e = self.s.trucks[i].electric
        r = e.enroute
        new = tr.feasibility["battery"]["new"]
        n_sim = tr.summary["trips_simulated"]
        model = ("model: the simulated operating day (tco.energy); the battery ageing rows "
                 "of the Cash flow sheet read it")
        self._inp(P + "ageing_days", "Operating days of the ageing (extra trips counted as "
                  "days)", op.trips / n_sim, "d/yr", model, wbb.ENERGY, field="")
        self._inp(P + "day_need_kwh", "Deepest drawdown of the operating day",
                  new["needed"] / _J_PER_KWH, "kWh", model, "0.00", field="")
        self._inp(P + "day_available_kwh", "Energy above the reserve, new battery",
                  new["available"] / _J_PER_KWH, "kWh", model, "0.00", field="")
        self._inp(P + "usable_new_kwh", "Usable capacity, new battery",
                  new["usable_capacity"] / _J_PER_KWH, "kWh", model, "0.00", field="")
        self._inp(P + "net_day_kwh", "Battery energy of the day, discharge less "
                  "regeneration", tr.summary["battery_energy_net"] * n_sim / _J_PER_KWH,
                  "kWh", model, "0.00", field="")
        self._inp(P + "depot_charge_eff", "Depot charging efficiency (grid to battery)",
                  e.charging_efficiency, "-", self.source(
                      f"trucks[{i}].electric.charging_efficiency"), _RATE)
        self._inp(P + "enroute_kw", "En-route charger power (0: none)", r.power / _W_PER_KW,
                  "kW", self.source(f"trucks[{i}].electric.enroute.power"), wbb.ENERGY)
        self._inp(P + "enroute_eff", "En-route charging efficiency (grid to battery)",
                  r.efficiency, "-", self.source(f"trucks[{i}].electric.enroute.efficiency"),
                  _RATE)
        self._inp(P + "stop_overhead_h", "Time lost per en-route stop besides charging",
                  r.overhead / _S_PER_H, "h", self.source(
                      f"trucks[{i}].electric.enroute.overhead"), "0.000")
        if r.charge_during_breaks:
            drive = tr.summary["day_driving_time"]
            after, dur = float(r.break_after), float(r.break_duration)
            breaks = math.floor(drive / after + 1e-12) if math.isfinite(after) and \
                after > 0 else 0.0
            self._inp(P + "break_cover_h", "Required breaks of the day (charging during "
                      "them costs no driver time)", breaks * dur / _S_PER_H, "h", model,
                      "0.000", field="")

    def _band_inputs(self, i: int) -> None:
        """Depot energy by time-of-use band: shares from the charging profile, and kWh."""
        op, P = self.ops[i], self.pre(i)
        parts: list[tuple[str, str]] = []
        if op.grid_energy_depot <= 0:
            self.bands_of[i] = parts
            return
        tariff = self.inputs.prices.electricity
        profile = np.asarray(op.charging_profile, dtype=float)
        covered = np.zeros(24, dtype=bool)
        model = "model: share of the depot energy drawn in the band's hours (charging profile)"
        for j, band in enumerate(tariff.bands):
            w = float(profile[band.hours].sum())
            covered[band.hours] = True
            if w > 0:  # the cash-flow model leaves out bands the truck does not use
                self._inp(f"{P}band{j + 1}_share", f"Share of depot energy in band {j + 1} "
                          f"'{band.name}'", w, "-", model, _RATE)
                parts.append((self._derived(
                    f"{P}depot_kwh_band{j + 1}", f"Depot energy per year in band {j + 1} "
                    f"'{band.name}'", f"{P}depot_kwh*{P}band{j + 1}_share", "kWh/yr",
                    wbb.ENERGY), f"elec_band{j + 1}_price"))
        rest = float(profile[~covered].sum())
        if rest > 1e-12:  # the model's threshold (tco.cashflow._Context.depot_price)
            self._inp(f"{P}other_share", "Share of depot energy in hours outside every band",
                      rest, "-", model, _RATE)
            parts.append((self._derived(
                f"{P}depot_kwh_other", "Depot energy per year outside every band",
                f"{P}depot_kwh*{P}other_share", "kWh/yr", wbb.ENERGY), "elec_energy_price"))
        self.bands_of[i] = parts

    def _emission_inputs(self) -> None:
        e = self.em_params
        src = self.source
        es = self.s.emissions
        prov = self.summary.get("emissions", {}).get("factors", [])
        set_rows = [f for f in prov if str(f["parameter"]).startswith(es.diesel_factors + ":")]
        set_src = "; ".join(f"{f['parameter']} = {f['value']} {f['unit']} ({f['source']}"
                            + (f", {f['status']}" if f.get("status") else "") + ")"
                            for f in set_rows) or es.diesel_factors
        gwp_rows = [f for f in prov if str(f["parameter"]).startswith(es.gwp + ":")]
        gwp_src = "; ".join(f"{f['parameter']} = {f['value']}" for f in gwp_rows)
        k = "emissions."
        self._sec("Emission factors (kg CO2e unless stated)")
        self._info("Diesel factor set", es.diesel_factors, "", src("emissions.diesel_factors"))
        self._info("GWP set", es.gwp, "", src("emissions.gwp"))
        self._inp("ef_diesel_ttw", "Diesel, tank-to-wheel CO2 (all gases when the set gives "
                  "one figure)", e[k + "diesel_co2"] * _M3_PER_L, "kg/L", set_src, "0.0000")
        self._inp("ef_diesel_ch4_n2o", "Diesel, CH4 and N2O per litre as CO2e",
                  e[k + "diesel_ch4_n2o"] * _M3_PER_L, "kg/L", f"{set_src}; GWP: {gwp_src}",
                  "0.000000")
        self._inp("ef_diesel_ch4_n2o_km", "Diesel trucks, CH4 and N2O per km as CO2e",
                  e[k + "diesel_ch4_n2o_distance"] * _M_PER_KM, "kg/km",
                  f"{set_src}; GWP: {gwp_src}", "0.000000")
        up_src = ("user" if es.diesel_upstream is not None else
                  "the diesel set's well-to-tank figure (or the DESNZ 2025 well-to-tank when the "
                  "set has none): " + "; ".join(
                      f"{f['parameter']} = {f['value']} {f['unit']} ({f['source']})"
                      for f in prov if ".co2e_w" in str(f["parameter"])))
        self._inp("ef_diesel_wtt", "Diesel, well-to-tank (upstream)",
                  e[k + "diesel_upstream"] * _M3_PER_L, "kg/L", up_src, "0.0000")
        self._inp("diesel_blend_share", "Biodiesel share of the diesel by volume (its CO2 "
                  "is biogenic, reported apart)", e[k + "diesel_blend_share"], "-",
                  src("emissions.diesel_blend_share"), _RATE)
        self._inp("ef_biodiesel_wtt", "Biodiesel, well-to-tank (upstream)",
                  e[k + "biodiesel_upstream"] * _M3_PER_L, "kg/L",
                  src("emissions.biodiesel_upstream"), "0.0000")
        self._inp("def_density", "Diesel exhaust fluid density", e[k + "def_density"] * _M3_PER_L,
                  "kg/L", src("emissions.def_density"), "0.000")
        self._inp("def_urea_share", "Urea mass share of diesel exhaust fluid",
                  e[k + "def_urea_share"], "-", src("emissions.def_urea_share"), _RATE)
        g = 1e3 * _J_PER_KWH  # kg/J -> g/kWh
        if es.grid_table:
            self.grid_years = sorted(int(y) for y in es.grid_table)
            for y in self.grid_years:
                self._inp(f"grid_table_{y}", f"Grid intensity in {y} (table; linear between "
                          "listed years, flat outside)", e[f"{k}grid_table.{y}"] * g,
                          "g/kWh", src("emissions.grid_table"), wbb.ENERGY)
            self._inp("grid_intensity", "Grid intensity in the table's first year (scales the "
                      "whole table)", e[k + "grid_intensity"] * g, "g/kWh",
                      src("emissions.grid_table"), wbb.ENERGY)
        else:
            self.grid_years = None
            self._inp("grid_intensity", "Grid intensity in the first year of service",
                      e[k + "grid_intensity"] * g, "g/kWh", src("emissions.grid_intensity"),
                      wbb.ENERGY)
            self._inp("grid_change", "Grid intensity, compound change per year",
                      e[k + "grid_change"], "-/yr", src("emissions.grid_change"), _RATE)
            self._inp("grid_floor", "Grid intensity floor", e[k + "grid_floor"] * g, "g/kWh",
                      src("emissions.grid_floor"), wbb.ENERGY)
        if k + "supplier_intensity" in e:
            self._inp("supplier_intensity", "Supplier's contractual intensity (market-based, "
                      "depot)", e[k + "supplier_intensity"] * g, "g/kWh",
                      src("emissions.supplier_intensity"), wbb.ENERGY)
        self._inp("renewable_share", "Contracted renewable share of depot electricity",
                  e[k + "renewable_share"], "-", src("emissions.renewable_share"), _RATE)
        self._inp("td_loss", "Grid transmission and distribution loss share", e[k + "td_loss"],
                  "-", src("emissions.td_loss"), _RATE)
        self._inp("ef_electricity_upstream", "Electricity upstream per kWh at the meter",
                  e[k + "electricity_upstream"] * g, "g/kWh",
                  src("emissions.electricity_upstream"), wbb.ENERGY)
        self._inp("ef_electricity_upstream_share", "Electricity upstream as a share of the "
                  "location-based grid intensity (when no figure per kWh is given)",
                  e[k + "electricity_upstream_share"], "-",
                  src("emissions.electricity_upstream_share"), _RATE)
        self._inp("residual_mix_ratio", "Residual mix ÷ grid average (market-based, "
                  "electricity without a contractual instrument; 1 when no residual mix is "
                  "given)", e[k + "residual_mix_ratio"], "-",
                  src("emissions.residual_mix_intensity"), "0.0000", field="")
        from tco.emissions import hour_matching_factor

        shape = np.array([e[f"{k}hourly_shape.{h:02d}"] for h in range(24)])
        for i, op in enumerate(self.ops):
            self._inp(f"{self.pre(i)}hour_match", f"Hour-matching multiplier of depot "
                      f"charging, truck {i + 1} (1: no hourly profile)",
                      float(hour_matching_factor(op.charging_profile, shape)), "-",
                      "model: Σ charging share by hour × hourly intensity ÷ mean intensity "
                      "(tco.emissions.hour_matching_factor)", _FACTOR)

    def _all_fields(self) -> None:
        """The scenario as run, as a field table ``tco run THIS_WORKBOOK`` reads back, on
        its own sheet (its own column headings on every printed page)."""
        from tco.scenario.xlsx import field_rows, write_field_table

        ws = self.ws_sc
        _section(ws, 1, "The scenario as run (empty value: the default). Edit a value here "
                 "or a yellow input on the Inputs sheet, then rerun: tco run "
                 "THIS_WORKBOOK.xlsx")
        raw = getattr(getattr(self.result, "loaded", None), "raw", None) or {}
        write_field_table(ws, 2, field_rows(self.s, raw), wrap=False)
        # one line a field, narrow enough to print upright: the description and source
        # show in full on screen (the printed page cuts the longest)
        wbb.set_widths(ws, {"A": 40, "B": 8, "C": 16, "D": 12, "E": 52, "F": 24, "G": 14})
        wbb.freeze(ws, "A3")
        for c in (_AS_WRITTEN_COL, _FIELD_COL, _FIELD_FACTOR_COL):
            self.ws_in.column_dimensions[_col(c)].hidden = True
        safe_text(self.ws_in.cell(row=1, column=_AS_WRITTEN_COL), "as written")
        safe_text(self.ws_in.cell(row=1, column=_FIELD_COL), "field")
        safe_text(self.ws_in.cell(row=1, column=_FIELD_FACTOR_COL), "to field unit")
