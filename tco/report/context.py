"""The report context: every figure of a Result formatted for reading.

This is where numbers become text (the templates compute nothing). The structure is the
one documented in :mod:`tco.report.html`. Display units follow ``study.units``.
"""
from __future__ import annotations

import contextlib
import functools
import gc
import math

import numpy as np
import pandas as pd

from tco import __version__
from tco.report import charts
from tco.report import formatting as fm
from tco.report.assumptions import build_appendix
from tco.report.findings import ageing_verdict, other_warnings
from tco.report.formatting import money as fmt_money  # noqa: F401 - public for other writers
from tco.report.formatting import number as _auto_number
from tco.units import J_PER_KWH as KWH
from tco.units import from_si

CAUTIONS = [
    "This report is a decision aid built on the inputs listed in the assumptions table. It "
    "is not financial, tax or legal advice; have the purchase case checked by qualified "
    "advisers before you commit money.",
    "Emissions figures are estimates. Verify them under the GHG Protocol (Corporate "
    "Standard, Scope 2 Guidance, Scope 3 Standard), ISO 14083 and your regulator's or "
    "programme's rules, with metered fuel and electricity records, before any disclosure.",
    "Depot chargers and grid connections must be designed and installed by licensed "
    "electricians under local electrical codes and the utility's connection rules.",
    "Gross-weight limits and any allowance for zero-emission trucks are set by local law; "
    "check them for every road the truck uses before relying on the payload figures.",
    "Energy use comes from a physics model of the duty cycle described, not from "
    "measurements; driver behaviour, traffic, weather and vehicle condition change it.",
]


class _Lazy:
    """A chart to draw later, so that all charts can be drawn in parallel."""

    def __init__(self, fn, args, kwargs):
        self.fn, self.args, self.kwargs = fn, args, kwargs

    def __call__(self) -> str:
        return self.fn(*self.args, **self.kwargs)


def _later(fn, *args, **kwargs) -> _Lazy:
    return _Lazy(fn, args, kwargs)


# Processes drawing the charts; batch workers (tco.batch) set it to 1 so that a batch
# does not start a chart pool inside each of its own worker processes.
CHART_WORKERS = 2
_JOBS: list[_Lazy] = []


def _run_job(k: int) -> str:
    return _JOBS[k]()


def _draw_all(jobs: list[_Lazy]) -> list[str]:
    """Draw the charts, on two processes where the platform can fork.

    Charts are independent and drawing them is CPU-bound pure Python (matplotlib), so a
    second process halves the time on a two-core machine. The jobs are handed over by
    fork (module global), never pickled; without fork, or if the pool fails to start,
    they are drawn here one after the other.
    """
    global _JOBS
    import multiprocessing as mp
    import os
    from concurrent.futures import ProcessPoolExecutor

    workers = min(CHART_WORKERS, os.cpu_count() or 1, len(jobs))
    if workers > 1 and "fork" in mp.get_all_start_methods():
        _JOBS = jobs
        try:
            with frozen_heap(), ProcessPoolExecutor(
                    workers, mp_context=mp.get_context("fork")) as pool:
                # longest first, so the two processes finish together
                order = sorted(range(len(jobs)), key=lambda k: -_weight(jobs[k]))
                done = dict(zip(order, pool.map(_run_job, order)))
            return [done[k] for k in range(len(jobs))]
        except (OSError, RuntimeError):  # pragma: no cover - no fork in this sandbox
            pass
        finally:
            _JOBS = []
    with frozen_heap():
        return [job() for job in jobs]


@contextlib.contextmanager
def frozen_heap():
    """The objects alive now are left out of Python's garbage collection while inside.

    Drawing a chart makes many short-lived objects, and each of the collector's full
    passes walks every object of the process: after the models, some 300,000 of them
    (pandas, numba, weasyprint). Frozen (:func:`gc.freeze`), they are skipped, and a
    forked child does not write their reference bookkeeping, so it does not copy their
    memory pages either (the Python documentation's advice for fork without exec).
    Measured on the demo's charts in one process: 1.07–1.40 CPU-s plain against
    0.83–0.87 CPU-s frozen; forked children took a third of the page faults; weasyprint
    rendering the demo report after the models, 2.35–2.88 CPU-s plain against 1.87–2.01
    CPU-s frozen (414,000 objects alive). The frozen objects are alive when frozen; any
    that become cyclic garbage meanwhile are collected after the outermost exit, when all
    are unfrozen (the blocks nest).
    """
    global _FROZEN
    gc.freeze()
    _FROZEN += 1
    try:
        yield
    finally:
        _FROZEN -= 1
        if _FROZEN == 0:
            gc.unfreeze()


_FROZEN = 0  # depth of nested frozen_heap blocks


_AHEAD: list[_Lazy] = []


def _draw_ahead() -> list[str]:
    return [job() for job in _AHEAD]


def _job_key(job: _Lazy) -> str:
    """The chart a job draws, as a digest of its function and arguments (charts are
    byte-stable: equal arguments draw equal bytes)."""
    import hashlib
    import pickle

    blob = pickle.dumps((job.fn.__module__, job.fn.__qualname__, job.args, job.kwargs),
                        protocol=pickle.HIGHEST_PROTOCOL)
    return hashlib.sha256(blob).hexdigest()


class ChartsAhead:
    """Draws the charts of the base case in a forked child while the models go on.

    Pass an instance as ``on_base_case`` to :func:`tco.pipeline.evaluate` and then to
    :func:`build_context` (through :func:`tco.report.write_outputs`). Called with the base
    case, it forks one child that draws every chart that does not depend on the
    uncertainty study, and the method notes' equations, while this process runs the
    study (on a two-core machine the child has the other core). :func:`build_context`
    then takes each chart whose job (function and arguments, :func:`_job_key`) the child
    drew; the others (the study's charts) are drawn meanwhile, by :class:`DeferredCharts`
    or in this process. Nothing is forked
    where the platform cannot fork, with one core or in a batch worker
    (:data:`CHART_WORKERS` = 1); a chart the child failed to draw is drawn again, so any
    error is raised where it would have been. The charts are the same bytes either way.

    Attributes
    ----------
    used : int
        Charts taken from the child by the last :meth:`take`. [-]
    """

    def __init__(self):
        self._keys: list[str] = []
        self._pool = self._future = None
        self.used = 0

    def __call__(self, base_case) -> None:
        global _AHEAD
        import multiprocessing as mp
        import os
        from concurrent.futures import ProcessPoolExecutor

        if (self._future is not None or CHART_WORKERS < 2 or (os.cpu_count() or 1) < 2
                or "fork" not in mp.get_all_start_methods()):
            return
        try:
            jobs = chart_jobs(base_case)
        except Exception:  # noqa: BLE001 - drawn (and raised) later, in the usual place
            return
        self._keys = [_job_key(j) for j in jobs]
        _AHEAD = jobs
        try:
            self._pool = ProcessPoolExecutor(1, mp_context=mp.get_context("fork"))
            with frozen_heap():
                self._future = self._pool.submit(_draw_ahead)  # forks here
        except (OSError, RuntimeError):  # pragma: no cover - no fork in this sandbox
            self._pool = self._future = None
        finally:
            _AHEAD = []

    @property
    def keys(self) -> frozenset[str]:
        """Keys of the charts the child is drawing (empty when none was started)."""
        return frozenset(self._keys) if self._future is not None else frozenset()

    def close(self) -> None:
        """Wait for the child, if any, and drop its charts (e.g. after an error)."""
        self.take()

    def take(self) -> dict[str, str]:
        """Wait for the child: its charts by key ({} when it failed or none ran)."""
        if self._future is None:
            return {}
        try:
            return dict(zip(self._keys, self._future.result()))
        except Exception:  # noqa: BLE001 - each chart is drawn again, raising there
            return {}
        finally:
            self._pool.shutdown()
            self._pool = self._future = None


_DEFERRED: list[_Lazy] = []


def _run_deferred(k: int) -> str:
    return _DEFERRED[k]()


class DeferredCharts:
    """Charts drawn by forked children while weasyprint reads the report.

    Give an instance to :func:`build_context`: each chart then stands in the context as a
    placeholder ``data:`` URI (a blank 1 × 1 SVG naming the chart, so that the HTML is
    valid and fetches nothing even if one were left), and its drawing starts at once, in
    up to :data:`CHART_WORKERS` forked processes (or comes from the :class:`ChartsAhead`
    child). :func:`tco.report.pdf.render_pdf` swaps each placeholder for the chart when
    weasyprint reaches its image, so the charts are drawn while weasyprint parses the
    HTML and resolves its styles (about a quarter of its time). :meth:`fill` gives the
    finished context (for the screen HTML). Where the platform cannot fork, or with one
    chart worker, the charts are drawn at once and no placeholder is made.
    """

    def __init__(self):
        import secrets

        self._token = secrets.token_hex(8)
        self._stand_in: dict[str, int] = {}
        self._get: list = []  # per chart: a callable giving its URI (waits)
        self._done: dict[int, str] = {}
        self._errors: list[BaseException] = []
        self._pool = None

    @property
    def active(self) -> bool:
        """Whether some charts are placeholders."""
        return bool(self._stand_in)

    def start(self, jobs: list[_Lazy], ahead: ChartsAhead | None = None) -> list[str]:
        """Start drawing ``jobs``; their placeholders (or, drawn at once, their URIs)."""
        global _DEFERRED
        import base64
        import multiprocessing as mp
        import os
        from concurrent.futures import ProcessPoolExecutor

        if (CHART_WORKERS < 2 or (os.cpu_count() or 1) < 2
                or "fork" not in mp.get_all_start_methods()):
            return _draw_with(jobs, ahead)
        pending = ahead.keys if ahead is not None else frozenset()
        keys = [_job_key(j) for j in jobs] if pending else [None] * len(jobs)
        mine = [k for k in range(len(jobs)) if keys[k] not in pending]
        getters: dict[int, object] = {}
        if mine:
            _DEFERRED = [jobs[k] for k in mine]
            try:
                self._pool = ProcessPoolExecutor(min(CHART_WORKERS, len(mine)),
                                                 mp_context=mp.get_context("fork"))
                with frozen_heap():  # forks at the first submit
                    order = sorted(range(len(mine)), key=lambda i: -_weight(_DEFERRED[i]))
                    futures = {i: self._pool.submit(_run_deferred, i) for i in order}
            except (OSError, RuntimeError):  # pragma: no cover - no fork in this sandbox
                if self._pool is not None:
                    self._pool.shutdown()
                self._pool = None
                return _draw_with(jobs, ahead)
            finally:
                _DEFERRED = []
            getters.update((k, futures[i].result) for i, k in enumerate(mine))
        if len(mine) < len(jobs):
            taken: dict[str, str] = {}
            getters_mine = frozenset(mine)

            def from_ahead(k):
                if not taken:
                    taken.update(ahead.take() or {"": ""})
                    ahead.used = sum(1 for j in range(len(jobs))
                                     if j not in getters_mine and keys[j] in taken)
                return taken[keys[k]] if keys[k] in taken else jobs[k]()

            getters.update((k, functools.partial(from_ahead, k))
                           for k in range(len(jobs)) if k not in getters)
        self._get = [getters[k] for k in range(len(jobs))]
        out = []
        for k in range(len(jobs)):
            svg = (f'<svg xmlns="http://www.w3.org/2000/svg" width="1" height="1"><desc>'
                   f'chart {k} of report {self._token}, being drawn</desc></svg>')
            uri = "data:image/svg+xml;base64," + base64.b64encode(svg.encode()).decode()
            self._stand_in[uri] = k
            out.append(uri)
        return out

    def _uri(self, k: int) -> str:
        if k not in self._done:
            self._done[k] = self._get[k]()
        return self._done[k]

    def resolve(self, uri: str) -> str | None:
        """The chart for a placeholder (waiting for it); None for any other URI. A chart
        that failed gives None here and its error at :meth:`check`."""
        k = self._stand_in.get(uri)
        if k is None:
            return None
        try:
            return self._uri(k)
        except Exception as exc:  # noqa: BLE001 - raised by check(), not lost in weasyprint
            self._errors.append(exc)
            return None

    def check(self) -> None:
        """Raise the first error of a chart that failed to draw."""
        if self._errors:
            raise self._errors[0]

    def fill(self, obj):
        """``obj`` (a context) with every placeholder replaced by its chart (waits)."""
        if isinstance(obj, dict):
            return {k: self.fill(v) for k, v in obj.items()}
        if isinstance(obj, list):
            return [self.fill(v) for v in obj]
        if isinstance(obj, str) and obj in self._stand_in:
            return self._uri(self._stand_in[obj])
        return obj

    def close(self) -> None:
        """Wait for the drawing processes and end them."""
        if self._pool is not None:
            self._pool.shutdown()
            self._pool = None


def chart_jobs(result) -> list[_Lazy]:
    """The charts and equations of a Result's report, as jobs not yet drawn."""
    u = fm.Units(result.scenario.study.units)
    found: list[_Lazy] = []
    _collect(_charts(result, u), found)
    found += [_later(charts.equation, tex) for *_, tex in METHOD_NOTES]
    return found


def _collect(x, found: list) -> None:
    if isinstance(x, dict):
        for v in x.values():
            _collect(v, found)
    elif isinstance(x, list):
        for v in x:
            _collect(v, found)
    elif isinstance(x, _Lazy):
        found.append(x)


def _draw_with(jobs: list[_Lazy], ahead: ChartsAhead | None) -> list[str]:
    """Draw ``jobs``, taking those the child of ``ahead`` drew."""
    keys = [_job_key(j) for j in jobs] if ahead is not None and ahead.keys else []
    if not keys:
        return _draw_all(jobs)
    pending = ahead.keys
    mine = [k for k, key in enumerate(keys) if key not in pending]
    drawn: dict[int, str] = {}
    if len(mine) <= 4:  # the study's few charts: here, while the child finishes
        with frozen_heap():
            drawn.update((k, jobs[k]()) for k in mine)
    else:
        drawn.update(zip(mine, _draw_all([jobs[k] for k in mine])))
    ready = ahead.take()
    ahead.used = sum(1 for k in range(len(jobs)) if k not in drawn and keys[k] in ready)
    late = [k for k in range(len(jobs)) if k not in drawn and keys[k] not in ready]
    drawn.update(zip(late, _draw_all([jobs[k] for k in late])))
    return [drawn[k] if k in drawn else ready[keys[k]] for k in range(len(jobs))]


def _weight(job: _Lazy) -> int:
    heavy = {"duty_cycle": 3, "stacked_yearly_cost": 3, "emissions_by_scope": 2,
             "tornado": 2, "distribution": 2}
    return heavy.get(job.fn.__name__, 1)


def _resolve(obj, ahead: ChartsAhead | None = None, deferred: DeferredCharts | None = None):
    """Replace every _Lazy inside the context by its drawn chart (or its placeholder)."""
    found: list[_Lazy] = []
    _collect(obj, found)
    uris = deferred.start(found, ahead) if deferred is not None else _draw_with(found, ahead)
    drawn = dict(zip(map(id, found), uris))

    def put(x):
        if isinstance(x, dict):
            return {k: put(v) for k, v in x.items()}
        if isinstance(x, list):
            return [put(v) for v in x]
        if isinstance(x, _Lazy):
            return drawn[id(x)]
        return x

    return put(obj)


def fmt_number(x: float | None, digits: int | None = 0) -> str:
    """A number with thousands separators, or an en dash when missing (see
    :func:`tco.report.formatting.number`; ``digits=None`` picks them by magnitude)."""
    return _auto_number(x, digits)


#: Tables with more columns than this go on a landscape page in the PDF.
WIDE_COLUMNS = 7

#: The study's display units (kept under its old name for the other report writers).
DisplayUnits = fm.Units


def _verdict(result, summary: dict) -> str:
    cf = result.cashflow
    cur = result.scenario.study.currency
    if not cf.comparisons:
        return "Only one truck was compared."
    emissions = summary["emissions"]["comparison"]
    parts = []
    for c in cf.comparisons:
        diff = c.present_value_difference
        word = "more" if diff > 0 else "less"
        # the same figure as the key-figure box: summary.json, location-based
        avoided = (emissions.get(c.truck, {}).get("avoided_kg_total") or {}).get("location")
        parts.append(
            f"Over {cf.analysis_years} years the {c.truck} costs "
            f"{fmt_money(abs(diff), cur)} {word} than the {c.baseline} in present value"
            + (f" and avoids {fmt_number(avoided / 1000, 0)} t CO2e (well-to-wheel, location-based)"
               if avoided is not None else "")
            + f"; {_feasible_text(result.trucks[c.truck])}.")
    parts += depot_sentences(result)
    parts.append(summary.get("cost_covers", {}).get("text") or "")
    return " ".join(p for p in parts if p)


def depot_sentences(result) -> list[str]:
    """What the depot costs the electric trucks and how the charging rule moves it: the
    rule, charger power, trucks sharing the depot, the depot cost each truck carries and
    the demand charge under the other rule (from ``result.depot``; one sentence a truck,
    short enough for the verdict box)."""
    d = getattr(result, "depot", None)
    if not d:
        return []
    cur = result.scenario.study.currency
    cf = result.cashflow
    n = d["trucks_sharing"]
    chargers = (f"{d['chargers']} × {fmt_number(d['charger_power'] / 1000)} kW charger"
                + ("s" if d["chargers"] != 1 else ""))
    shared = "for this truck alone" if n == 1 else f"shared by {n} trucks"
    out = []
    for name, t in d["trucks"].items():
        share = "all" if n == 1 else f"1/{n}"
        s = (f"Depot: {d['charging']} charging on {chargers} {shared}; the {name} carries "
             f"{share} of its build and upkeep ({fmt_money(t['depot_cost'], cur)} in present "
             f"value) and a demand charge of {fmt_money(t['demand_charge'], cur)} on "
             f"{fmt_number(t['peak_contribution'] / 1000)} kW")
        if t["other_demand_charge"] is not None:
            diff = t["other_difference"]
            word = "more" if diff > 0 else "less"
            s += (f"; {d['other_charging']} charging: "
                  f"{fmt_money(t['other_demand_charge'], cur)} on "
                  f"{fmt_number(t['other_peak_contribution'] / 1000)} kW, and it would cost "
                  f"{fmt_money(abs(diff), cur)} {word} than the {cf.baseline}")
        out.append(s + ".")
    return out


def _feasible_text(tr) -> str:
    if tr.powertrain != "electric":
        return "it can do the job"
    b = tr.feasibility["battery"]
    aged = tr.feasibility.get("battery_by_year")
    depot_ok = tr.feasibility["depot_charger"]["ok"]
    if aged and depot_ok and (b["new"]["ok"] or b["new"]["ok_with_enroute"]):
        start = ("it can do the day on its new battery" if b["new"]["ok"]
                 else "it can do the day only with en-route charging")
        return f"{start}; {ageing_verdict(aged)}"
    if b["new"]["ok"] and b["end_of_life"]["ok"] and depot_ok:
        return "it can do the day on its battery, new and at end of life"
    if b["new"]["ok"] and depot_ok:
        return ("it can do the day on its new battery, but at end of life it needs "
                + ("en-route charging" if b["end_of_life"]["ok_with_enroute"]
                   else "a change of plan"))
    if b["new"]["ok_with_enroute"] and depot_ok:
        return "it can do the day only with en-route charging"
    return "it cannot do the day as planned (see the feasibility findings)"


def _feasible_short(tr) -> tuple[str, str]:
    """A short verdict for the key-figure box, and the detail as its note."""
    b = tr.feasibility["battery"]
    if not tr.feasibility["depot_charger"]["ok"]:
        return "No", "the depot charger cannot refill the battery in the window"
    aged = tr.feasibility.get("battery_by_year")
    if b["new"]["ok"] and aged:
        return "Yes", f"on the new battery; {ageing_verdict(aged)}"
    if b["new"]["ok"]:
        eol = ("also at end of life" if b["end_of_life"]["ok"] else
               "at end of life it needs en-route charging" if b["end_of_life"]["ok_with_enroute"]
               else "not at end of life")
        return "Yes", f"on the new battery; {eol}"
    if b["new"]["ok_with_enroute"]:
        return "With en-route charging", f"{fm.minutes(b['new']['enroute_time'])} a day"
    return "No", "the battery cannot do the day and no en-route charging is given"


def _key_figures(result, u: DisplayUnits, summary: dict) -> list[dict]:
    cf = result.cashflow
    cur = result.scenario.study.currency
    out = []
    for m in cf.trucks:
        out.append({"label": f"Cost per {u.dist}, {m.name}",
                    "value": fm.unit_price(m.levelized_cost * 1000, "km", cur, u.system, 3),
                    "note": f"levelized over {cf.analysis_years} years"})
    em = summary["emissions"]["comparison"]
    for c in cf.comparisons:
        out.append({"label": f"Present value difference, {c.truck} − {c.baseline}",
                    "value": fmt_money(c.present_value_difference, cur),
                    "note": "positive: costs more"})
        out.append({"label": "Payback of the extra purchase cost",
                    "value": (f"year {c.simple_payback_year}" if c.simple_payback_year
                              else "not within the period"),
                    "note": ("discounted: " + (f"year {c.discounted_payback_year}"
                                               if c.discounted_payback_year
                                               else "not within the period"))})
        out.append({"label": "IRR of the extra investment",
                    "value": fm.irr_text(c.irr, None, c.simple_payback_year,
                                         check_payback=True),
                    "note": c.irr_note or (
                        "" if fm.number(c.irr) != fm.DASH
                        else "the cash flows have no meaningful rate of return")})
        e = em.get(c.truck, {})
        avoided = (e.get("avoided_kg_total") or {}).get("location")
        out.append({"label": f"Emissions avoided by the {c.truck}",
                    "value": f"{fmt_number(None if avoided is None else avoided / 1000)} t CO2e",
                    "note": f"well-to-wheel, location-based, {cf.analysis_years} years"})
        ab = (e.get("abatement_cost_per_tonne") or {}).get("location")
        disc = bool(e.get("tonnes_discounted"))
        other = (e.get("abatement_cost_per_tonne_"
                       + ("undiscounted_tonnes" if disc else "discounted_tonnes")) or {}
                 ).get("location")
        out.append({"label": "Abatement cost",
                    "value": f"{fmt_number(ab)} {cur}/t CO2e" if ab is not None else "–",
                    "note": "PV cost difference ÷ tonnes avoided "
                    + ("discounted like the costs" if disc else "not discounted")
                    + (f"; {fmt_number(other)} {cur}/t on "
                       + ("undiscounted" if disc else "discounted") + " tonnes"
                       if other is not None else "")})
    for name, tr in result.trucks.items():
        if tr.powertrain == "electric":
            value, note = _feasible_short(tr)
            out.append({"label": f"Feasibility, {name}", "value": value, "note": note})
    if result.uncertainty is not None:
        pr = result.uncertainty.probabilities
        for r in pr[pr["event"] == "cheaper"].itertuples():
            out.append({"label": f"Probability the {r.truck} is cheaper",
                        "value": fm.percent(r.probability, 0),
                        "note": f"Monte Carlo, {fm.count(result.uncertainty.draws)} draws"})
    return out


def _feasibility(result, u: DisplayUnits | None = None) -> list[dict]:
    """One row per truck: its verdict, its findings as one text (``detail``) and as
    ``parts`` (``{"text", "warn"}``: the report marks the findings that are warnings
    there and does not repeat them among the other warnings)."""
    from tco.report.findings import truck_findings

    u = u or fm.Units(result.scenario.study.units)
    rows = []
    for name, tr in result.trucks.items():
        parts = [{"text": f["text"], "warn": f["warn"]} for f in truck_findings(tr, u)]
        rows.append({"truck": name, "verdict": _feasible_text(tr).capitalize(),
                     "detail": " ".join(p["text"] for p in parts), "parts": parts})
    return rows


def _breakeven_year(cum: pd.DataFrame) -> float | None:
    """The year (fractional) at which the second truck's cumulative cost line falls below
    the first's for good, by linear interpolation within the year; None if it never does
    or was never above. "For good" is the rule of the payback year
    (:func:`tco.finance.payback_year`: the year after the last one the cumulative saving
    is negative), so a crossing at 5.4 is a payback in year 6."""
    if cum.shape[1] < 2:
        return None
    d = (cum.iloc[:, 1] - cum.iloc[:, 0]).to_numpy(float)
    tol = 1e-9 * max(float(np.max(np.abs(np.diff(d, prepend=0.0)))), 1.0)
    dearer = np.nonzero(d > tol)[0]
    if len(dearer) == 0 or dearer[-1] + 1 >= len(d):
        return None
    k = int(dearer[-1]) + 1
    return float(k - 1 + d[k - 1] / (d[k - 1] - d[k]))


def _payback_of(result, names: list[str], be: float | None) -> int | None:
    """The payback key figure (whole years) that the chart's crossing ``be`` falls in,
    or None when no comparison of these two trucks has it."""
    if be is None or len(names) < 2:
        return None
    c = next((c for c in result.cashflow.comparisons
              if c.truck == names[1] and c.baseline == names[0]), None)
    ok = c is not None and c.simple_payback_year == math.ceil(be)
    return c.simple_payback_year if ok else None


def _breakeven_caption(be: float | None, payback: int | None) -> str:
    """The cumulative chart's sentence on its crossing, tied to the payback key figure."""
    if be is None:
        return " The lines do not cross within the period."
    text = f" The lines cross at year {fm.number(be, 1)}, within year {math.ceil(be)}"
    if payback is not None:
        return text + (f": the extra purchase cost is paid back in year {payback}, the "
                       "payback of the key figures (counted in whole years).")
    return text + "."


def _breakeven_label(be: float | None, payback: int | None) -> str | None:
    if be is None:
        return None
    tail = f" (payback year {payback})" if payback is not None else ""
    return f"Break-even: year {fm.number(be, 1)}{tail}"


def _charts(result, u: DisplayUnits) -> dict:
    cf = result.cashflow
    cur = result.scenario.study.currency
    names = [m.name for m in cf.trucks]
    totals = cf.yearly_totals()[names]
    cum = totals.cumsum()
    be = _breakeven_year(cum)
    payback = _payback_of(result, names, be)
    table = _grouped_lines(cf.table)
    cost = [
        {"title": "Cumulative cost of ownership",
         "caption": f"Net cash out, cumulative by year ({cf.money_basis} money, not "
                    "discounted)." + _breakeven_caption(be, payback),
         "uri": _later(charts.cumulative_cost, cum, be, ylabel=f"Cumulative cost [{cur}]",
                       breakeven_label=_breakeven_label(be, payback))},
        {"title": "Yearly cost by group of lines",
         "caption": "Costs stack upward, income (grant, loan received, residual value) "
                    "downward; the black bar is the net of each year. Line by line: the "
                    "present value table and the workbook.",
         "uri": _later(charts.stacked_yearly_cost, table, names, ylabel=f"Cost per year [{cur}]")},
    ]
    energy = [
        {"title": f"Energy per {u.dist} by road-load component",
         "caption": "Where the energy goes at the wheel, and the powertrain and charging "
                    "losses on top, up to the energy drawn at the source (fuel energy "
                    "at its lower heating value; electricity at the meter). Negative: "
                    "energy given back on descents and when slowing.",
         "uri": _later(charts.energy_components, _energy_frame(result, u),
                                         xlabel=f"Energy per distance [kWh/{u.dist}]")},
    ]
    trace_truck = next((t for t in result.trucks.values() if t.powertrain == "electric"),
                       next(iter(result.trucks.values())))
    energy.append({
        "title": f"Duty cycle of one operating day, {trace_truck.name}",
        "caption": "Speed, elevation, battery state of charge and battery power (positive: "
                   "discharging) over the day, trips and dwell times included.",
        "uri": _later(charts.duty_cycle, _trace_frame(trace_truck, u), xlabel="Time [h]",
                                 labels={"speed": f"Speed [{u.speed}]",
                                         "elevation": f"Elevation [{u.elev}]",
                                         "soc": "State of charge [%]",
                                         "power": "Power [kW]"})})
    em = result.emissions.totals
    frames = {"scope_1": "Scope 1", "scope_2_location": "Scope 2 (location-based)",
              "scope_3_cat3": "Scope 3 cat. 3"}
    tidy = em[em["frame"].isin(frames)].assign(
        scope=lambda d: d["frame"].map(frames), value=lambda d: d["kg_co2e"] / 1000)
    emissions = [{"title": "Emissions per year by scope",
                  "caption": "Location-based Scope 2; Scope 3 category 3 is the upstream of "
                             "fuel and electricity and grid losses.",
                  "uri": _later(charts.emissions_by_scope, 
                      tidy[["truck", "year", "scope", "value"]],
                      ylabel="Emissions [t CO2e per year]")}]
    unc = []
    if result.uncertainty is not None:
        unc = _uncertainty_charts(result, cur)
    return {"cost": cost, "energy": energy, "emissions": emissions, "uncertainty": unc}


GROUP_LABELS = {
    "purchase": "Purchase and incentives", "financing": "Financing", "depot": "Depot charging",
    "energy": "Energy", "running": "Running costs", "battery": "Battery replacement",
    "end": "End-of-life value", "tax": "Tax effects",
}


def _grouped_lines(table: pd.DataFrame) -> pd.DataFrame:
    """The cash-flow table summed by group of cost lines (tidy: truck, year, line, value)."""
    from tco.cost_lines import registry

    group = {spec.name: GROUP_LABELS.get(spec.group, spec.group) for spec in registry()}
    order = list(dict.fromkeys(group[n] for n in table["line"].unique()))
    out = (table.assign(line=table["line"].map(group))
           .groupby(["truck", "year", "line"], sort=False, as_index=False)["amount"].sum()
           .rename(columns={"amount": "value"}))
    out["line"] = pd.Categorical(out["line"], categories=order, ordered=True)
    return out.sort_values(["line", "truck", "year"], kind="stable").assign(
        line=lambda d: d["line"].astype(str))


def _uncertainty_charts(result, cur: str) -> list[dict]:
    unc = result.uncertainty
    out = []
    for truck in unc.trucks:
        t = unc.tornado[unc.tornado["truck"] == truck]
        if not t.empty:
            rows = t[["input", "low", "high"]]
            out.append({"title": f"What drives the answer: {truck} against {unc.baseline}",
                        "caption": "Present value difference with one input at a time at its "
                                   "low and high value (ranges in the sensitivity table); "
                                   "widest swing on top.",
                        "uri": _later(charts.tornado, rows, float(t["base"].iloc[0]),
                                              xlabel=f"Present value difference [{cur}]")})
        te = getattr(unc, "tornado_emissions", None)
        te = te[te["truck"] == truck] if te is not None else []
        if len(te):
            out.append({"title": f"What drives the emissions avoided: {truck} against "
                                 f"{unc.baseline}",
                        "caption": "Emissions avoided over the period (well-to-wheel, "
                                   "location-based, t CO2e) with one input at a time at its "
                                   "low and high value; the same ranges as the cost "
                                   "sensitivity, plus the emission factors.",
                        "uri": _later(charts.tornado, te[["input", "low", "high"]],
                                      float(te["base"].iloc[0]),
                                      xlabel="Emissions avoided [t CO2e]")})
        draws = unc.samples[unc.samples["truck"] == truck]["present_value_difference"]
        if len(draws):
            out.append({"title": f"How sure is the answer: {truck}",
                        "caption": f"{fm.count(unc.draws)} Monte Carlo draws (seed {unc.seed}) of the "
                                   "present value difference; below zero the "
                                   f"{truck} is cheaper.",
                        "uri": _later(charts.distribution, draws.to_numpy(),
                                                   f"Present value difference [{cur}]")})
    return out


def _short_source(source: str) -> str:
    """A tornado range's source in a few words for the report's table."""
    return (source.replace("P10–P90 of its distribution", "P10–P90")
            .replace("default ", "").replace("the two rules", "both rules"))


def _range_text(r, cur: str, system: str) -> str:
    """The low – high of a tornado row ("managed – unmanaged" for the charging rule)."""
    key = getattr(r, "key", r.input)
    if key == "depot.charging":
        return "managed – unmanaged"
    return fm.range_text(_tornado_input_value(r.low_value, r.unit, key, cur, system),
                         _tornado_input_value(r.high_value, r.unit, key, cur, system))


def _tornado_input_value(value, unit: str, key: str, cur: str, system: str) -> str:
    """A tornado or break-even input value (in the input's documented display unit)."""
    if not fm._finite(value):
        return "none"
    if unit == "×":
        return f"{fm.number(value, 2)} × scenario"
    if unit == "currency":
        return fm.money(value, cur)
    if unit.startswith("1/"):
        per = "kW·month" if key.endswith("demand_charge") else unit[2:]
        return fm.unit_price(value, per, cur, system)
    if unit in ("", "-") and fm.is_percent_field(key, unit):
        return fm.percent(value, 2)
    if key.endswith("days_per_year"):
        return f"{fm.number(value, 0)} days"
    return f"{fm.number(value)} {unit}".strip()


def _uncertainty_tables(result, cur: str, system: str = "metric") -> list[dict]:
    unc = result.uncertainty
    tables = []
    t = unc.tornado
    if not t.empty:
        rows = [[r.input, _range_text(r, cur, system), _short_source(r.source),
                 fmt_number(r.low), fmt_number(r.high), fmt_number(r.swing)]
                for r in t.itertuples()]
        tables.append({"title": "Sensitivity, one input at a time",
                       "columns": ["Input", "Low – high", "Range from", f"ΔPV low [{cur}]",
                                   f"ΔPV high [{cur}]", f"Swing [{cur}]"],
                       "rows": rows, "note": "ΔPV: present value of the compared truck minus "
                       f"the {unc.baseline}; negative means the compared truck is cheaper. "
                       "Range from: P10–P90 of the input's distribution in the scenario (the "
                       f"one the Monte Carlo draws from); ±{fm.percent(unc.default_swing, 0)}: the default "
                       "swing, only for inputs without a range. Depot inputs are scheduled and costed again "
                       "at each value. The emissions tornado's figures are in the workbook "
                       "and summary.json."})
    st = unc.statistics
    labels = {"present_value_difference": (f"ΔPV [{cur}]", 1.0, 0),
              "levelized_cost_difference": (
                  f"Δ cost per {'mi' if system == 'us' else 'km'} "
                  f"[{cur}/{'mi' if system == 'us' else 'km'}]",
                  fm.Units(system).per_dist, 3),
              "simple_payback_year": ("Payback year", 1.0, 1),
              "avoided_kg_location": ("Emissions avoided [t CO2e]", 1e-3, 0)}
    rows = []
    for r in st.itertuples():
        if r.quantity in labels:
            name, k, d = labels[r.quantity]
            rows.append([f"{r.truck}: {name}"] + [fmt_number(v * k if math.isfinite(v) else v, d)
                                                  for v in (r.p10, r.p50, r.p90)])
    tables.append({"title": "Monte Carlo statistics", "columns": ["Quantity", "P10", "P50",
                                                                  "P90"], "rows": rows,
                   "note": f"{fm.count(unc.draws)} draws, seed {unc.seed}. P10, P50, P90: the "
                           "values that 10 %, 50 % and 90 % of the draws fall below."})
    events = {"cheaper": "is cheaper than the " + unc.baseline,
              "pays_back_simple": "pays back its extra cost within the period",
              "pays_back_discounted": "pays back its extra cost within the period, "
                                      "discounted",
              "avoids_emissions_location": "avoids emissions (location-based)",
              "avoids_emissions_market": "avoids emissions (market-based)"}
    prows = [[f"The {r.truck} " + events.get(r.event, r.event.replace("_", " ")),
              fm.percent(r.probability, 1), "± " + fm.percent(r.standard_error, 1)]
             for r in unc.probabilities.itertuples()]
    if prows:
        tables.append({"title": "Monte Carlo probabilities",
                       "columns": ["Event", "Probability", "Standard error"], "rows": prows,
                       "note": " ".join(unc.notes[:3])})
    return tables


def _break_even_table(result, summary: dict, cur: str, system: str) -> dict:
    """One break-even table: the uncertainty study's inputs when it ran, else the four
    inputs of the cash-flow comparison."""
    unc = result.uncertainty
    rows: list[list[str]] = []
    notes: list[str] = []
    if unc is not None and not unc.break_even.empty:
        b = unc.break_even
        key = "key" if "key" in b.columns else "input"
        # the same break-evens as the workbook's Summary sheet states them (a price per
        # kWh, a distance a year), beside the study's multiplier or days
        u = fm.Units(system)
        absolute = {c["truck"]: c["break_even"] for c in summary["cashflow"]["comparisons"]}
        also = {"electricity_price": ("electricity_price_per_kwh",
                                      lambda v: fm.unit_price(v, "kWh", cur, system)),
                "route.days_per_year": ("annual_distance_km",
                                        lambda v: f"{u.quantity(v * 1000.0, 'km', 0)}/year")}
        for r in b.itertuples():
            k = getattr(r, key)
            factor = getattr(r, "factor", None)
            change = fm.signed_percent(factor - 1.0) if fm._finite(factor) else fm.DASH
            label = (f"{r.truck}: " if len(unc.trucks) > 1 else "") + r.input
            if r.note:
                notes.append(f"{label}: {r.note}")
            shown = _tornado_input_value(r.value, r.unit, k, cur, system)
            if k in also and fm._finite(r.value):
                name, show = also[k]
                v = (absolute.get(r.truck) or {}).get(name, {}).get("value")
                if fm._finite(v):
                    shown = f"{shown} ({show(v)})"
            rows.append([label, shown,
                         _tornado_input_value(r.base_value, r.unit, k, cur, system), change])
    else:
        u = fm.Units(system)
        for c in summary["cashflow"]["comparisons"]:
            be = c["break_even"]
            specs = (("diesel_price_per_litre", "Diesel price",
                      lambda v: fm.unit_price(v, "L", cur, system)),
                     ("electricity_price_per_kwh", "Depot electricity price",
                      lambda v: fm.unit_price(v, "kWh", cur, system)),
                     ("purchase_price", f"Purchase price of the {c['truck']}",
                      lambda v: fm.money(v, cur)),
                     ("annual_distance_km", "Annual distance",
                      lambda v: u.quantity(v * 1000.0, "km", 0)))
            for k, label, show in specs:
                b = be.get(k)
                if b is None:
                    continue
                if b["note"]:
                    notes.append(f"{label}: {b['note']}")
                rows.append([label, show(b["value"]) if b["value"] is not None else "none"])
        return {"title": "Break-even values", "columns": ["Input", "Break-even"],
                "rows": rows, "note": "The value at which the trucks cost the same in "
                "present value, all other inputs unchanged. " + " ".join(notes)}
    return {"title": "Break-even values", "columns": ["Input", "Break-even", "Scenario value",
                                                      "Change"], "rows": rows,
            # room for a unit price kept on one line ("25.14 EUR/kW·month")
            "widths": [34, 25, 25, 16],
            "note": "The value at which the trucks cost the same in present value, all "
                    "other inputs unchanged; change: from the scenario's value. "
                    + " ".join(f"{n}." if not n.endswith(".") else n for n in notes)}


def _energy_frame(result, u: DisplayUnits) -> pd.DataFrame:
    names = {"aerodynamic": "Aerodynamic drag", "rolling": "Rolling resistance",
             "climbing": "Climbing", "descending": "Descending (given back)",
             "acceleration": "Acceleration", "deceleration": "Slowing (given back)"}
    cols = {}
    for name, tr in result.trucks.items():
        s = tr.summary
        d = s["trip_distance"]
        w = s["wheel_energy"]
        col = {label: w[k] / d for k, label in names.items()}
        wheel_net = w["traction"] - w["braking"]
        if tr.powertrain == "diesel":
            source = s["fuel_volume"] * _diesel_lhv_per_m3(result, name)
            col["Engine and driveline losses"] = (source - wheel_net) / d
        else:
            source = s["grid_energy_depot"] + s["grid_energy_public"]
            col["Drivetrain, aux. and charging losses"] = (source - wheel_net) / d
        cols[name] = col
    df = pd.DataFrame(cols).fillna(0.0)
    return df * u.per_dist / KWH


def _diesel_lhv_per_m3(result, truck: str) -> float:
    t = next(t for t in result.scenario.trucks if t.name == truck)
    return t.diesel.fuel_lhv * t.diesel.fuel_density


def _trace_frame(tr, u: DisplayUnits) -> pd.DataFrame:
    t = tr.trace
    out = pd.DataFrame({
        "time": t["time"] / 3600.0,
        "speed": from_si(t["speed"].to_numpy(), u.speed),
        "elevation": from_si(t["elevation"].to_numpy(), u.elev),
    })
    if "soc" in t:
        out["soc"] = t["soc"] * 100.0
        out["power"] = t["battery_power"] / 1000.0
    else:
        out["power"] = t["wheel_power"] / 1000.0
    return out


def _tables(result, u: DisplayUnits, summary: dict) -> list[dict]:
    cf = result.cashflow
    cur = result.scenario.study.currency
    names = list(result.trucks)
    tables = []
    # energy and operation per truck
    rows = []
    s = summary["trucks"]
    sysk = "us" if u.us else "metric"
    rows.append(["Distance per trip [" + u.dist + "]"]
                + [fmt_number(u.distance(result.trucks[n].summary["trip_distance"]), 1)
                   for n in names])
    rows.append(["Wheel energy, traction per trip [kWh]"]
                + [fmt_number(s[n]["per_trip"]["wheel_energy_kWh"]["traction"], 1) for n in names])
    rows.append(["Diesel per trip [" + ("US gal" if u.us else "L") + "]"]
                + [fmt_number(from_si(result.trucks[n].summary.get("fuel_volume", 0.0),
                              "gal" if u.us else "L"), 1) for n in names])
    rows.append(["Fuel use [" + ("mpg" if u.us else "L/100 km") + "]"]
                + [fmt_number(s[n]["per_distance"][sysk].get("fuel_mpg" if u.us else
                                                     "fuel_L_per_100km"), 1) for n in names])
    rows.append(["Battery energy per trip, net [kWh]"]
                + [fmt_number(s[n]["per_trip"].get("battery_net_kWh"), 1) for n in names])
    rows.append([f"Electricity at the meter [kWh/{u.dist}]"]
                + [fmt_number(s[n]["per_distance"][sysk].get(f"grid_kWh_per_{u.dist}"), 3)
                   for n in names])
    rows.append(["Lowest state of charge in the day [%]"]
                + [fmt_number(100 * s[n]["feasibility"]["soc_min"], 0)
                   if "soc_min" in s[n]["feasibility"] else "–" for n in names])
    rows.append(["Payload capacity [" + ("lb" if u.us else "t") + "]"]
                + [fmt_number(from_si(result.trucks[n].summary["payload_capacity"],
                              "lb" if u.us else "t"), 1) for n in names])
    rows.append([f"Distance per year [{u.dist}]"]
                + [fmt_number(u.distance(result.trucks[n].operation.distance)) for n in names])
    rows.append(["Extra trips per year (payload)"]
                + [fmt_number(result.trucks[n].operation.extra_trips, 0) for n in names])
    tables.append({"title": "Energy and operation", "columns": ["Figure"] + names,
                   "rows": rows, "note": "Per trip unless stated; one operating day = "
                   f"{fmt_number(result.scenario.route.trips_per_day, 1)} trips."})
    # yearly net cost
    totals = cf.yearly_totals()[[m.name for m in cf.trucks]]
    cols = ["Year"] + [f"{n} [{cur}]" for n in totals.columns]
    pairs = [(c.truck, c.baseline) for c in cf.comparisons]
    cols += [f"{a} − {b} [{cur}]" for a, b in pairs]
    rows = [[str(y)] + [fmt_number(v) for v in totals.loc[y]]
            + [fmt_number(totals.loc[y, a] - totals.loc[y, b]) for a, b in pairs]
            for y in totals.index]
    pv = {m.name: m.present_value for m in cf.trucks}
    rows.append(["Present value"] + [fmt_number(m.present_value) for m in cf.trucks]
                + [fmt_number(pv[a] - pv[b]) for a, b in pairs])
    view = summary["cashflow"].get("valuation", "as_financed")
    tables.append({"title": "Net cost by year", "columns": cols, "rows": rows,
                   "total": True,
                   "note": f"{cf.money_basis.capitalize()} money; year 0 is the purchase; "
                           f"discount rate {fm.percent(cf.discount_rate)}; "
                           + ("every truck paid in cash (unlevered; financing below)."
                              if view == "unlevered" else "loans and leases included "
                              "(as financed).")})
    fin_table = _financing_table(summary["cashflow"], cur,
                                 [m.name for m in cf.trucks])
    if fin_table is not None:
        tables.append(fin_table)
    # present value by line: human labels, a total and the difference to the baseline
    from tco.cost_lines import registry

    described = {spec.name: spec.description for spec in registry()}
    lines = []
    for m in cf.trucks:
        for k in m.present_value_by_line:
            if k not in lines:
                lines.append(k)
    base = next((m for m in cf.trucks if cf.comparisons
                 and m.name == cf.comparisons[0].baseline), None)
    others = [m for m in cf.trucks if m is not base]
    cols = ["Cost line"] + [f"{m.name} [{cur}]" for m in cf.trucks]
    if base is not None:
        cols += [f"{m.name} − {base.name} [{cur}]" for m in others]
    rows = []
    for k in lines:
        vals = [m.present_value_by_line.get(k, 0.0) for m in cf.trucks]
        if all(abs(v) < 0.5 for v in vals):
            continue  # a line that is zero for every truck says nothing
        row = [described.get(k, k.replace("_", " ").capitalize())] + [fmt_number(v)
                                                                      for v in vals]
        if base is not None:
            bv = base.present_value_by_line.get(k, 0.0)
            row += [fmt_number(m.present_value_by_line.get(k, 0.0) - bv) for m in others]
        rows.append(row)
    total = ["Total (present value)"] + [fmt_number(m.present_value) for m in cf.trucks]
    if base is not None:
        total += [fmt_number(m.present_value - base.present_value) for m in others]
    rows.append(total)
    tables.append({"title": "Present value by cost line", "columns": cols, "rows": rows,
                   "total": True,
                   "note": "Negative: money in (grant, loan received, residual value). Lines "
                           "that are zero for every truck are left out."})
    tables.append(_break_even_table(result, summary, cur, u.system))
    # emissions
    e = summary["emissions"]["trucks"]
    keys = [("scope_1", "Scope 1"), ("scope_2_location", "Scope 2, location-based"),
            ("scope_2_market", "Scope 2, market-based"), ("scope_3_cat3", "Scope 3 cat. 3"),
            ("ttw", "Tank-to-wheel"), ("wtw", "Well-to-wheel (location)"),
            ("wtw_market", "Well-to-wheel (market)")]
    rows = [[label + " [t CO2e]"] + [fmt_number(e[n]["total_kg"][k] / 1000, 1) for n in names]
            for k, label in keys]
    rows.append(["Well-to-wheel intensity [g CO2e/t·km]"]
                + [fmt_number(e[n]["g_co2e_per_tkm"]["wtw"], 1) for n in names])
    # per km, or per mile in US units (g per km × km per mile)
    rows.append([f"Well-to-wheel intensity [g CO2e/{u.dist}]"]
                + [fmt_number(u.per_distance(e[n]["g_co2e_per_km"]["wtw"] / 1000.0), 0)
                   for n in names])
    tables.append({"title": f"Emissions over {cf.analysis_years} years",
                   "columns": ["Frame"] + names, "rows": rows,
                   "note": "GHG Protocol scopes and ISO 14083 tank-to-wheel / well-to-wheel."})
    if result.uncertainty is not None:
        tables += _uncertainty_tables(result, cur, u.system)
    for t in tables:
        t.setdefault("total", False)
        # more columns than a portrait page holds legibly: the PDF prints the table on a
        # landscape page of its own (report.html.j2: @page wide); the HTML scrolls it
        t["wide"] = len(t["columns"]) > WIDE_COLUMNS
    return tables


#: Reader's names of the emission factor quantities (tco/data/README.md); the machine
#: names (with their factor set) stay in summary.json's ``emissions.factors``, and the
#: source column names the publication.
FACTOR_LABELS = {
    "diesel.co2": "Diesel CO2, tank-to-wheel", "diesel.ch4": "Diesel CH4, tank-to-wheel",
    "diesel.n2o": "Diesel N2O, tank-to-wheel", "diesel.co2e_ttw": "Diesel CO2e, tank-to-wheel",
    "diesel.co2e_wtw": "Diesel CO2e, well-to-wheel",
    "diesel.co2e_wtt": "Diesel CO2e, well-to-tank",
    "diesel.net_calorific_value": "Diesel net calorific value",
    "diesel.density": "Diesel density", "gwp.co2": "GWP-100, CO2", "gwp.ch4": "GWP-100, CH4",
    "gwp.n2o": "GWP-100, N2O", "diesel_upstream": "Diesel upstream, well-to-tank",
    "electricity_upstream_share": "Electricity upstream share",
}


def _factor_name(parameter: str) -> str:
    """``"desnz_2025:diesel.co2e_ttw"`` → ``"Diesel CO2e, tank-to-wheel"``."""
    quantity = str(parameter).rpartition(":")[2]
    return FACTOR_LABELS.get(quantity, quantity)


def _factor_table(summary: dict) -> dict | None:
    """The emission factors used, with their sources: a reference table of the appendix."""
    # factors without a status are scenario inputs or tool defaults: the appendix lists
    # them already (with their sources) among the emissions inputs
    factors = [f for f in summary["emissions"].get("factors") or [] if f.get("status")]
    if not factors:
        return None
    return {
        "kind": "reference", "title": "Emission factors used",
        "columns": ["Factor", "Value", "Unit", "Source", "Status"],
        "widths": [19, 8, 11, 50, 12],
        "rows": [[_factor_name(f["parameter"]), fmt_number(f["value"], None), str(f["unit"]),
                  str(f["source"]), str(f["status"])] for f in factors],
        "note": "Status: confirmed (in the source), seen in a public copy, third-party copy "
                "(only as reproduced by others: unconfirmed), from memory. Factors that "
                "are scenario inputs or tool defaults are listed with the emissions inputs "
                "above."}


def _appendix(result, summary: dict, u) -> dict:
    """The assumptions appendix, with the emission factors table in its emissions part."""
    appendix = build_appendix(result.assumptions, result.scenario, u.system)
    table = _factor_table(summary)
    if table is not None:
        sec = next((x for x in appendix["sections"] if x["title"] == "Emissions"), None)
        if sec is None:
            sec = {"title": "Emissions", "columns": ["Input", "Value"], "rows": [],
                   "tables": []}
            appendix["sections"].append(sec)
        sec["tables"].append(table)
    return appendix


def _financing_table(cashflow: dict, cur: str, names: list[str] | None = None) -> dict | None:
    """Loans and leases shown apart from the headline, one column per truck (None when
    every truck pays cash); ``names`` orders the columns (default: financed trucks first,
    then the compared ones)."""
    from tco.report.summary_sections import financing_rows

    f = cashflow.get("financing") or {}
    if not f.get("trucks"):
        return None
    if names is None:
        names = list(f["trucks"])
        for c in f.get("comparisons") or []:
            names += [n for n in (c["baseline"], c["truck"]) if n not in names]
    rows = []
    for r in financing_rows(f, names):
        cells = []
        for n in names:
            v = r["values"][n]
            if isinstance(v, str):
                cells.append(v)
            elif r["kind"] == "money":
                cells.append(fmt_number(v) if v is not None else "–")
            elif "notes" in r:
                # a negative rate means the undiscounted savings never recover the extra
                # cost: "n/a" with that reason, as the key figure's IRR
                cells.append(fm.irr_text(v, None if fm._finite(v) else (
                    r["notes"][n] or "the flows have no meaningful rate of return"),
                    None, check_payback=True))
            else:
                cells.append(fm.percent(v, 2) if v is not None else "–")
        unit = f" [{cur}]" if r["kind"] == "money" else ""
        rows.append([r["label"] + unit] + cells)
    return {"title": "Financing, shown apart", "columns": ["Figure"] + list(names),
            "rows": rows,
            "note": "Positive: the loan or lease costs more than paying cash. The financing's "
                    "flows are the net cost as financed minus the net cost paid in cash, "
                    "tax effects included."}


METHOD_NOTES = [
    ("Road load", "Wheel force on each time step from aerodynamic drag (air density from "
     "the 1976 standard atmosphere at the trip's mean elevation and the ambient "
     "temperature; by default the wind's direction is averaged over all directions, "
     "adding ½ρC_dA·w²/2, or with ambient.wind_treatment = \"headwind\" it blows against "
     "the truck on every leg), rolling resistance, grade with the exact slope angle, and inertia with "
     "an equivalent rotating-mass factor. Speeds are averaged over each step, so kinetic "
     "and potential energy balance exactly.",
     "F = ½ρC_dA(v+v_w)|v+v_w| + C_rr m g cosθ + m g sinθ + f_r m a",
     r"F = \frac{1}{2}\rho C_d A (v+v_w)|v+v_w| + C_{rr} m g \cos\theta + m g \sin\theta"
     r" + f_r m a"),
    ("Diesel fuel", "Engine power is wheel power through the driveline plus accessories; "
     "fuel follows the Willans line (or a constant BSFC). Fuel is cut on overrun; idling "
     "burns the idle rate at traffic stops, while a parked truck (loading, unloading) is "
     "switched off except for the parked-idle share (route.parked_idle_share), which also "
     "sets the electric truck's auxiliaries while parked. Where the trace asks for more than "
     "rated power the truck slows to the speed its power holds, so the time and fuel of "
     "the slower climb are counted (route.slow_when_power_limited).",
     "ṁ_f = (P_e + P_0) / (η_m · LHV)",
     r"\dot m_f = \dfrac{P_e + P_0}{\eta_m \, LHV}"),
    ("Battery and charging", "Battery power is wheel power through the drivetrain plus "
     "auxiliaries (heating and cooling grow with the distance from the comfort band); "
     "braking energy is regenerated within the motor and battery limits and never above a "
     "full battery. Grid energy is battery energy divided by the charging efficiency. "
     "In the cold the tyres roll harder (the UNECE R117 / ISO 28580 temperature "
     "correction from the 25 °C label value), the pack is kept warm while driving and "
     "pre-heated from the depot grid, and regeneration is limited below 0 °C. "
     "En-route charging follows a power curve (full power up to a state of charge, then "
     "falling linearly) from the reserve, and may coincide with the driver's required "
     "breaks: only charging beyond the breaks, plus each stop's overhead, costs driver "
     "time.",
     "E_{k+1} = min(E_max, E_k − P_b Δt);  E_grid = E_b / η_ch",
     r"E_{k+1} = \min(E_{max}, E_k - P_b \Delta t), \quad E_{grid} = E_b/\eta_{ch}"),
    ("Cost of ownership", "Yearly cash flows per cost line, escalated per line, discounted "
     "at the discount rate; the levelized cost is discounted cost over discounted distance. "
     "The present values, levelized costs, payback and IRR are on unlevered flows (every "
     "truck paid in cash) unless the scenario sets finance.valuation = 'as_financed'; a loan "
     "or lease is judged apart, against paying cash at the after-tax cost of debt. Every "
     "amount of year y, running cost or one-off, is today's price × (1 + escalation)^y. In "
     "the after-tax view battery replacements are capitalised and depreciated with the "
     "truck's tax schedule.",
     "PV = Σ_y C_y (1+r)^−y;  LCC = PV / Σ_y d_y (1+r)^−y",
     r"PV = \sum_y C_y (1+r)^{-y}, \quad LCC = PV \,/\, \sum_y d_y (1+r)^{-y}"),
    ("Emissions", "Diesel litres times the selected factor set (CO2, CH4 and N2O with the "
     "chosen GWP set, upstream), DEF urea CO2 by the IPCC 2006 equation; electricity at "
     "the meter times the grid intensity of each year (matched hour by hour when a profile "
     "is given), plus upstream and grid losses. The abatement cost divides the "
     "present-value cost difference by the tonnes avoided discounted at the same rate "
     "(unless emissions.discount_tonnes is false); the figure on undiscounted tonnes is "
     "shown beside it. Market-based Scope 2 counts electricity without a contractual "
     "instrument at the residual mix when one is given, else at the grid average. "
     "Electricity upstream is a share of each year's grid intensity unless a figure per kWh "
     "is given. The biodiesel share of a diesel blend emits biogenic CO2, reported apart "
     "from the scopes.",
     "E = V_d f_d + m_DEF·w·(12/60)(44/12) + E_grid·I(y)·(1 + L/(1−L))",
     r"E = V_d f_d + m_{DEF}\, w \,\frac{12}{60}\frac{44}{12} + E_{grid} I(y)"),
]


def build_context(result, summary: dict, ahead: ChartsAhead | None = None,
                  deferred: DeferredCharts | None = None) -> dict:
    """The report context of a Result (see :mod:`tco.report.html` for the structure).

    ``ahead``: the :class:`ChartsAhead` given to :func:`tco.pipeline.evaluate`, whose
    charts are taken where they are the same jobs. ``deferred``: charts are placeholders
    being drawn meanwhile (see :class:`DeferredCharts`).
    """
    s = result.scenario
    u = fm.Units(s.study.units)
    notes = [{"title": t, "text": x, "equation": eq, "equation_uri": _later(charts.equation, tex)}
             for t, x, eq, tex in METHOD_NOTES]
    cautions = list(CAUTIONS) + [c for c in summary["emissions"].get("cautions", [])[1:]]
    return _resolve({
        "meta": {"title": s.study.name, "date": result.created[:10], "version": __version__,
                 "fingerprint": "sha256:" + result.loaded.fingerprint[:16],
                 "currency": s.study.currency, "units": u.label,
                 "page_size": s.study.page_size, "notes": s.study.notes},
        "verdict": _verdict(result, summary),
        "key_figures": _key_figures(result, u, summary),
        "charts": _charts(result, u),
        "feasibility": _feasibility(result, u),
        "warnings": other_warnings(result.warnings, result.trucks, u),
        "tables": _tables(result, u, summary),
        "assumptions": _appendix(result, summary, u),
        "method_notes": notes,
        "cautions": cautions,
    }, ahead, deferred)
