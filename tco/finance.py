"""Finance metrics over yearly cash flows: discounting, loans, depreciation, payback, IRR.

Every function works on the last axis of an array of yearly flows, year 0 first
(``flows[..., 0]`` is the purchase moment, ``flows[..., y]`` the end of year y), and
broadcasts over any leading axes, so one call handles one case or 100,000 Monte Carlo
draws. Rates are fractions per year; a rate may be a float or an array of shape
``(n_draws,)`` that lines up with the leading axis of the flows.

numpy-financial is the reference these functions are checked against
(``tests/test_finance.py``); it is not called on the hot path because its ``irr`` and
``npv`` handle one series at a time.

Payback years and :func:`compare_costs` are compiled loops (numba), written out because
no library computes them for many series at once: a payback needs the largest flow of
the series (its rounding-dust threshold) before the running sum can be judged, so numpy
needs about ten full-size temporaries per call (some 25 ms for 100,000 draws of 16
years). The loops take a block of 512 series at a time, years in the outer loop and
series in the inner one (vectorized), so the block stays in cache.
:func:`compare_costs` gives the Monte Carlo both present values and both payback years of
a pair of trucks in one pass, and takes the trucks' costs as :class:`FlowParts`, so that
their (draws × years) arrays are never written to memory.

References
----------
.. [1] numpy-financial documentation, functions ``npv``, ``irr``, ``pmt``, ``ipmt``,
   ``ppmt`` (numpy-financial 1.0).
.. [2] Internal Revenue Service, *Publication 946, How To Depreciate Property*,
   Appendix A, Table A-1 "3-, 5-, 7-, 10-, 15-, and 20-Year Property, Half-Year Convention".
"""
from __future__ import annotations

from dataclasses import dataclass
from typing import NamedTuple

import numpy as np
from numba import njit
from scipy.optimize import brentq

from tco.report import formatting as fm

__all__ = [
    "MACRS_GDS_HALF_YEAR", "BreakEven", "CostComparison", "FlowParts",
    "LevelizedComparison", "LoanSchedule", "annuity_payment", "compare_costs",
    "compare_levelized", "depreciation_flows",
    "depreciation_fractions",
    "discount_factors", "find_break_even", "irr", "irr_roots", "IRR_STATUS",
    "levelized_cost", "loan_schedule", "nominal_rate", "payback_year", "present_value",
    "real_rate",
]

#: US MACRS General Depreciation System, half-year convention: percent of the basis
#: deducted in recovery years 1, 2, ... Copied from IRS Publication 946 (How To Depreciate
#: Property), Appendix A, Table A-1 (200 % declining balance switching to straight line).
#: The table's own rounding differs from a generator (3-year, year 2: 44.45, not 44.44),
#: so it is hard-coded, not computed. Over-the-road tractor units are 3-year property
#: (Publication 946, Table B-1, asset class 00.26).
MACRS_GDS_HALF_YEAR: dict[int, tuple[float, ...]] = {
    3: (33.33, 44.45, 14.81, 7.41),
    5: (20.00, 32.00, 19.20, 11.52, 11.52, 5.76),
    7: (14.29, 24.49, 17.49, 12.49, 8.93, 8.92, 8.93, 4.46),
}


def _col(x):
    """A float stays a float; an (n,) array becomes an (n, 1) column; a column stays."""
    a = np.asarray(x, dtype=float)
    if a.ndim == 0:
        return float(a)
    return a[:, None] if a.ndim == 1 else a


def real_rate(nominal, inflation):
    """Real rate from a nominal rate and inflation (Fisher relation).

    .. math:: 1 + r_{real} = (1 + r_{nom}) / (1 + i)

    Parameters
    ----------
    nominal : float or array
        Nominal rate per year. [-]
    inflation : float or array
        Inflation per year. [-]

    Returns
    -------
    float or array
        Real rate per year. [-]

    Examples
    --------
    >>> round(float(real_rate(0.071, 0.02)), 6)
    0.05
    """
    return (1.0 + np.asarray(nominal)) / (1.0 + np.asarray(inflation)) - 1.0


def nominal_rate(real, inflation):
    """Nominal rate from a real rate and inflation: (1 + r)(1 + i) − 1. [-]

    Examples
    --------
    >>> round(float(nominal_rate(0.05, 0.02)), 6)
    0.071
    """
    return (1.0 + np.asarray(real)) * (1.0 + np.asarray(inflation)) - 1.0


def discount_factors(rate, n_years: int):
    """End-of-year discount factors for years 0..n_years.

    .. math:: d_y = (1 + r)^{-y}

    Parameters
    ----------
    rate : float or array of shape (n,)
        Discount rate per year, above -1. [-]
    n_years : int
        Last year. [yr]

    Returns
    -------
    ndarray, shape (n_years + 1,) or (n, n_years + 1)
        Discount factors. [-]

    Examples
    --------
    >>> discount_factors(0.1, 2).round(4).tolist()
    [1.0, 0.9091, 0.8264]
    """
    y = np.arange(n_years + 1, dtype=float)
    return (1.0 + _col(rate)) ** -y


def present_value(flows, rate):
    """Present value at year 0 of yearly flows (year 0 not discounted).

    .. math:: PV = \\sum_{y=0}^{N} F_y (1 + r)^{-y}

    Same convention as ``numpy_financial.npv`` [1]_ (a spreadsheet ``NPV`` discounts its
    first value one period).

    Parameters
    ----------
    flows : array, shape (..., N + 1)
        Flows by year, year 0 first. [currency]
    rate : float or array of shape (n,)
        Discount rate per year. [-]

    Returns
    -------
    float or ndarray of shape (...)
        Present value. [currency]

    Examples
    --------
    >>> round(float(present_value([-100, 60, 60], 0.10)), 6)
    4.132231
    """
    f = np.asarray(flows, dtype=float)
    out = np.sum(f * discount_factors(rate, f.shape[-1] - 1), axis=-1)
    return float(out) if np.ndim(out) == 0 else out


def levelized_cost(flows, quantity, rate):
    """Levelized cost: discounted cost over discounted quantity (e.g. distance).

    .. math:: LC = \\frac{\\sum_y C_y (1+r)^{-y}}{\\sum_y Q_y (1+r)^{-y}}

    Parameters
    ----------
    flows : array, shape (..., N + 1)
        Costs by year. [currency]
    quantity : array, shape (..., N + 1)
        Quantity delivered by year (distance [m]). [unit]
    rate : float or array
        Discount rate per year. [-]

    Returns
    -------
    float or ndarray
        Cost per unit of quantity (per metre for distance). [currency/unit]

    Examples
    --------
    >>> levelized_cost([100.0, 10.0, 10.0], [0.0, 1.0, 1.0], 0.0)
    60.0
    """
    return present_value(flows, rate) / present_value(quantity, rate)


# --------------------------------------------------------------------------- loans
def annuity_payment(principal, rate_per_period, n_periods: int):
    """Level payment that repays ``principal`` in ``n_periods`` instalments in arrears.

    .. math:: A = P \\frac{i}{1 - (1 + i)^{-n}}, \\qquad A = P / n \\text{ when } i = 0

    Equals ``-numpy_financial.pmt(i, n, P)`` [1]_.

    Parameters
    ----------
    principal : float or array
        Amount borrowed. [currency]
    rate_per_period : float or array
        Interest rate per instalment period, at least 0. [-]
    n_periods : int
        Number of instalments. [-]

    Returns
    -------
    float or ndarray
        Payment per period. [currency]

    Examples
    --------
    >>> round(float(annuity_payment(200000, 0.075 / 12, 180)), 4)
    1854.0247
    """
    p = np.asarray(principal, dtype=float)
    i = np.asarray(rate_per_period, dtype=float)
    with np.errstate(divide="ignore", invalid="ignore"):
        a = np.where(i > 0, p * i / -np.expm1(-n_periods * np.log1p(np.maximum(i, 0.0))),
                     p / n_periods)
    return float(a) if a.ndim == 0 else a


@dataclass(frozen=True)
class LoanSchedule:
    """A loan's flows by year 0..n_years (arrays broadcast like the inputs).

    Attributes
    ----------
    interest : ndarray, shape (..., n_years + 1)
        Interest paid in each year. [currency]
    principal : ndarray, shape (..., n_years + 1)
        Principal repaid in each year. [currency]
    balance : ndarray, shape (..., n_years + 1)
        Balance owed at the end of each year (year 0: the amount borrowed). [currency]
    """

    interest: np.ndarray
    principal: np.ndarray
    balance: np.ndarray


def loan_schedule(principal, annual_rate, term_years: int, payments_per_year: int,
                  n_years: int) -> LoanSchedule:
    """Yearly interest and principal of a level-payment loan, instalments in arrears.

    With :math:`m` instalments a year at :math:`i = r/m`, payment :math:`A`
    (:func:`annuity_payment`) and the balance after :math:`k` instalments

    .. math:: B_k = P (1 + i)^k - A \\frac{(1 + i)^k - 1}{i},

    year y repays :math:`B_{m(y-1)} - B_{my}` of principal and pays
    :math:`mA - (B_{m(y-1)} - B_{my})` of interest. Summed per year this equals
    ``numpy_financial.ppmt`` and ``ipmt`` [1]_.

    Parameters
    ----------
    principal : float or array of shape (n,)
        Amount borrowed at year 0. [currency]
    annual_rate : float or array of shape (n,)
        Nominal interest rate per year, at least 0. [-]
    term_years : int
        Term. [yr]
    payments_per_year : int
        Instalments per year (12: monthly). [1/yr]
    n_years : int
        Years to report (the schedule stops at the term). [yr]

    Returns
    -------
    LoanSchedule

    Examples
    --------
    >>> s = loan_schedule(1000.0, 0.10, 2, 1, 2)
    >>> s.interest.round(2).tolist(), s.principal.round(2).tolist()
    ([0.0, 100.0, 52.38], [0.0, 476.19, 523.81])
    """
    m = int(payments_per_year)
    n = int(term_years) * m
    p = _col(principal)
    i = _col(annual_rate) / m
    a = annuity_payment(p, i, n)
    k = np.minimum(np.arange(n_years + 1), term_years) * m  # instalments paid by end of year
    with np.errstate(divide="ignore", invalid="ignore"):
        growth = (1.0 + i) ** k
        bal = np.where(np.asarray(i) > 0, p * growth - a * (growth - 1.0) / i, p - a * k)
    bal = np.where(k >= n, 0.0, bal)  # exactly zero after the last instalment
    bal = np.broadcast_to(bal, np.broadcast_shapes(np.shape(bal), np.shape(p)))
    principal_paid = np.zeros_like(bal)
    principal_paid[..., 1:] = bal[..., :-1] - bal[..., 1:]
    paid = np.diff(k, prepend=0) * a  # total instalments in each year
    interest = np.where(paid > 0, paid - principal_paid, 0.0)
    return LoanSchedule(interest=interest, principal=principal_paid, balance=bal)


# --------------------------------------------------------------------------- depreciation
def depreciation_fractions(method: str, years: int = 5, db_percent: int = 200,
                           macrs_class: int = 3) -> np.ndarray:
    """Share of the depreciable basis deducted in tax years 1, 2, ... (sums to 1).

    ``straight_line``: 1/L each year. ``declining_balance``: rate d/L on the remaining
    basis (d = db_percent/100), switching to straight line over the remaining years when
    that gives more (full-year convention). ``macrs``: IRS Publication 946 Table A-1 [2]_
    (half-year convention: class + 1 years).

    Parameters
    ----------
    method : {"straight_line", "declining_balance", "macrs"}
    years : int
        Tax life L for the first two methods. [yr]
    db_percent : int
        Declining-balance percent of the straight-line rate (200 or 150). [%]
    macrs_class : {3, 5, 7}
        MACRS GDS property class. [yr]

    Returns
    -------
    ndarray
        Fractions by tax year. [-]

    Examples
    --------
    >>> depreciation_fractions("macrs", macrs_class=3).tolist()
    [0.3333, 0.4445, 0.1481, 0.0741]
    >>> depreciation_fractions("declining_balance", 4).round(4).tolist()
    [0.5, 0.25, 0.125, 0.125]
    """
    if method == "straight_line":
        return np.full(years, 1.0 / years)
    if method == "declining_balance":
        # Written out because no maintained library gives a plain switching schedule.
        rate = db_percent / 100.0 / years
        left, out = 1.0, []
        for k in range(years):
            d = max(left * rate, left / (years - k))
            out.append(d)
            left -= d
        return np.array(out)
    if method == "macrs":
        return np.array(MACRS_GDS_HALF_YEAR[int(macrs_class)]) / 100.0
    raise ValueError(f"unknown depreciation method '{method}'")


def depreciation_flows(basis, start_year: int, fractions, n_years: int):
    """Depreciation of one asset by year, and its tax book value left at the end.

    Parameters
    ----------
    basis : float or array of shape (n,) or (n, 1)
        Depreciable basis, placed in service at ``start_year``. [currency]
    start_year : int
        Year the asset is bought; its first deduction is in the next year. [yr]
    fractions : array
        From :func:`depreciation_fractions`. [-]
    n_years : int
        Last year of the analysis. [yr]

    Returns
    -------
    depreciation : ndarray, shape (..., n_years + 1)
        Deduction in each year. [currency]
    book_left : float or ndarray (shape of ``basis``)
        Basis not yet deducted at the end of year ``n_years``. [currency]
    """
    f = np.zeros(n_years + 1)
    last = min(n_years, start_year + len(fractions))
    if last > start_year:
        f[start_year + 1:last + 1] = fractions[: last - start_year]
    b = np.asarray(basis, dtype=float)
    dep = _col(b) * f
    left = b * (1.0 - f.sum())
    return dep, (float(left) if left.ndim == 0 else left)


# --------------------------------------------------------------------------- metrics
#: A cumulative flow counts as negative below -1e-9 × max(largest |flow|, 1): rounding
#: dust is not a loss.
_DUST = 1e-9
#: Series per block of the compiled passes: the block's flows (two (N + 1, 512) arrays)
#: and running sums stay in the L2 cache.
_BLOCK = 512


#: Offsets of the running values of a block's series in :func:`_compare_block`'s state:
#: discount factor, present values, annuity factor, cumulative savings (simple and
#: discounted), largest saving (both).
_DF, _PV_B, _PV_C, _ANN, _CUM_S, _CUM_D, _TOP_S, _TOP_D = (j * _BLOCK for j in range(8))


@njit(cache=True, nogil=True, inline="always")
def _one_year(b, c, df, v, pv_b, pv_c, cum_s, cum_d, top_s, top_d):
    """One year of one series in :func:`_compare_block`'s first pass: the present values,
    the cumulative savings (simple and discounted), the largest saving of each, and the
    next year's discount factor."""
    pv_b += b * df
    pv_c += c * df
    s = b - c
    cum_s += s
    a = abs(s)
    top_s = a if a > top_s else top_s
    s *= df
    cum_d += s
    a = abs(s)
    top_d = a if a > top_d else top_d
    return pv_b, pv_c, cum_s, cum_d, top_s, top_d, df * v


@njit(cache=True, nogil=True)
def _compare_block(base, cost, v, k, pv_base, pv_cost, simple, discounted, annuity):
    """Present values of two blocks of series, the payback years of ``base − cost`` and
    the annuity factor Σ_{y=1..N} v^y.

    ``base``, ``cost``: (N + 1, _BLOCK) years first, series ``0..k-1`` used; they are
    scratch (overwritten with the cumulative savings). ``v`` = 1 / (1 + r) per series.
    Years in the outer loop and series in the inner one, so the inner loops run over
    contiguous series (vectorized) instead of one serial chain of sums per series.
    Discount factors are built by repeated multiplication (v^y, within y rounding steps
    of ``(1+r)**-y``).

    The inner loops take four years at a time with each series' running values in
    registers, so that they are stored once per four years instead of every year (stores
    bound this loop); the rows are read from the flat blocks at constant offsets of
    _BLOCK, which lets the compiler see that they do not overlap and vectorize the loop.
    The operations and their order are those of one year at a time. (A ``continue`` in
    the loops over the years kept the compiler from vectorizing them: twice as slow.)
    """
    if base.shape[1] != _BLOCK or cost.shape[1] != _BLOCK:
        raise ValueError("blocks of _BLOCK series are expected")
    n_years = base.shape[0]
    b = base.reshape(base.size)
    c = cost.reshape(cost.size)
    st = np.zeros(8 * _BLOCK)
    for i in range(k):
        st[_DF + i] = 1.0
    # pass 1: present values, cumulative savings (kept in place of the flows) and the
    # largest saving, simple and discounted
    y = 0
    while y < n_years:
        step = 4 if y > 0 and y + 4 <= n_years else 1
        o0 = y * _BLOCK
        if step == 4:
            o1 = o0 + _BLOCK
            o2 = o1 + _BLOCK
            o3 = o2 + _BLOCK
            for i in range(k):
                df = st[_DF + i]
                vi = v[i]
                pv_b = st[_PV_B + i]
                pv_c = st[_PV_C + i]
                ann = st[_ANN + i]
                cum_s = st[_CUM_S + i]
                cum_d = st[_CUM_D + i]
                top_s = st[_TOP_S + i]
                top_d = st[_TOP_D + i]
                ann += df
                pv_b, pv_c, cum_s, cum_d, top_s, top_d, df = _one_year(
                    b[o0 + i], c[o0 + i], df, vi, pv_b, pv_c, cum_s, cum_d, top_s, top_d)
                b[o0 + i] = cum_s
                c[o0 + i] = cum_d
                ann += df
                pv_b, pv_c, cum_s, cum_d, top_s, top_d, df = _one_year(
                    b[o1 + i], c[o1 + i], df, vi, pv_b, pv_c, cum_s, cum_d, top_s, top_d)
                b[o1 + i] = cum_s
                c[o1 + i] = cum_d
                ann += df
                pv_b, pv_c, cum_s, cum_d, top_s, top_d, df = _one_year(
                    b[o2 + i], c[o2 + i], df, vi, pv_b, pv_c, cum_s, cum_d, top_s, top_d)
                b[o2 + i] = cum_s
                c[o2 + i] = cum_d
                ann += df
                pv_b, pv_c, cum_s, cum_d, top_s, top_d, df = _one_year(
                    b[o3 + i], c[o3 + i], df, vi, pv_b, pv_c, cum_s, cum_d, top_s, top_d)
                b[o3 + i] = cum_s
                c[o3 + i] = cum_d
                st[_DF + i] = df
                st[_PV_B + i] = pv_b
                st[_PV_C + i] = pv_c
                st[_ANN + i] = ann
                st[_CUM_S + i] = cum_s
                st[_CUM_D + i] = cum_d
                st[_TOP_S + i] = top_s
                st[_TOP_D + i] = top_d
        else:  # year 0 (no annuity term yet) and the years left over
            for i in range(k):
                df = st[_DF + i]
                ann = st[_ANN + i]
                if y > 0:
                    ann += df
                pv_b, pv_c, cum_s, cum_d, top_s, top_d, df = _one_year(
                    b[o0 + i], c[o0 + i], df, v[i], st[_PV_B + i], st[_PV_C + i],
                    st[_CUM_S + i], st[_CUM_D + i], st[_TOP_S + i], st[_TOP_D + i])
                b[o0 + i] = cum_s
                c[o0 + i] = cum_d
                st[_DF + i] = df
                st[_PV_B + i] = pv_b
                st[_PV_C + i] = pv_c
                st[_ANN + i] = ann
                st[_CUM_S + i] = cum_s
                st[_CUM_D + i] = cum_d
                st[_TOP_S + i] = top_s
                st[_TOP_D + i] = top_d
        y += step
    # pass 2: the last year the cumulative saving is below -dust (-1: never)
    for i in range(k):
        top_s = st[_TOP_S + i]
        top_d = st[_TOP_D + i]
        st[_TOP_S + i] = -_DUST * (top_s if top_s > 1.0 else 1.0)
        st[_TOP_D + i] = -_DUST * (top_d if top_d > 1.0 else 1.0)
        st[_CUM_S + i] = -1.0
        st[_CUM_D + i] = -1.0
    y = 0
    while y < n_years:
        step = 4 if y + 4 <= n_years else 1
        o0 = y * _BLOCK
        y0 = float(y)
        if step == 4:
            o1 = o0 + _BLOCK
            o2 = o1 + _BLOCK
            o3 = o2 + _BLOCK
            y1 = y0 + 1.0
            y2 = y0 + 2.0
            y3 = y0 + 3.0
            for i in range(k):
                dust_s = st[_TOP_S + i]
                dust_d = st[_TOP_D + i]
                last_s = st[_CUM_S + i]
                last_d = st[_CUM_D + i]
                last_s = y0 if b[o0 + i] < dust_s else last_s
                last_d = y0 if c[o0 + i] < dust_d else last_d
                last_s = y1 if b[o1 + i] < dust_s else last_s
                last_d = y1 if c[o1 + i] < dust_d else last_d
                last_s = y2 if b[o2 + i] < dust_s else last_s
                last_d = y2 if c[o2 + i] < dust_d else last_d
                last_s = y3 if b[o3 + i] < dust_s else last_s
                last_d = y3 if c[o3 + i] < dust_d else last_d
                st[_CUM_S + i] = last_s
                st[_CUM_D + i] = last_d
        else:
            for i in range(k):
                st[_CUM_S + i] = y0 if b[o0 + i] < st[_TOP_S + i] else st[_CUM_S + i]
                st[_CUM_D + i] = y0 if c[o0 + i] < st[_TOP_D + i] else st[_CUM_D + i]
        y += step
    # payback: the year after the last negative one; 0 if never; NaN if still negative
    end = n_years - 1.0
    for i in range(k):
        last_s = st[_CUM_S + i]
        last_d = st[_CUM_D + i]
        simple[i] = 0.0 if last_s < 0 else (np.nan if last_s + 1 > end else last_s + 1)
        discounted[i] = 0.0 if last_d < 0 else (np.nan if last_d + 1 > end else last_d + 1)
        pv_base[i] = st[_PV_B + i]
        pv_cost[i] = st[_PV_C + i]
        annuity[i] = st[_ANN + i]


@njit(cache=True, nogil=True)
def _copy_block(flows, j0, k, out):
    """Series ``j0..j0+k-1`` of years-last ``flows`` ((m, N + 1), or (1, N + 1) shared by
    every series) into the years-first block ``out``."""
    shared = flows.shape[0] == 1
    for y in range(out.shape[0]):
        row = out[y, :k]
        if shared:
            row[:] = flows[0, y]
        else:
            for i in range(k):
                row[i] = flows[j0 + i, y]


@njit(cache=True, nogil=True)
def _rates_block(growth, j0, k, out):
    for i in range(k):
        out[i] = 1.0 / growth[j0 + i if growth.shape[0] > 1 else 0]


@njit(cache=True, nogil=True)
def _compare_pass(base, cost, growth, pv_base, pv_cost, simple, discounted, annuity):
    """:func:`_compare_block` over m series given years last: ``base``, ``cost`` (m, N + 1)
    or (1, N + 1) (one row shared by every series); ``growth`` = 1 + r, (m,) or (1,)."""
    m = simple.shape[0]
    b = np.empty((base.shape[1], _BLOCK))
    c = np.empty((base.shape[1], _BLOCK))
    v = np.empty(_BLOCK)
    for j0 in range(0, m, _BLOCK):
        k = min(_BLOCK, m - j0)
        _copy_block(base, j0, k, b)
        _copy_block(cost, j0, k, c)
        _rates_block(growth, j0, k, v)
        _compare_block(b, c, v, k, pv_base[j0:], pv_cost[j0:], simple[j0:],
                       discounted[j0:], annuity[j0:])


def _series_count(*counts: int) -> int:
    """The number of series of inputs that have m or 1 (shared) series each."""
    m = max(counts)
    if any(c not in (1, m) for c in counts):
        raise ValueError(f"the inputs have {sorted(set(counts))} series; give the same "
                         "number, or one to share")
    return m


def _run_compare(base, cost, rate):
    """The compiled pass on years-last 2-D arrays (m or 1 rows); five (m,) arrays."""
    g = np.atleast_1d(1.0 + np.asarray(0.0 if rate is None else rate, dtype=float))
    if base.shape[1] != cost.shape[1]:
        raise ValueError("the two series have different numbers of years")
    m = _series_count(base.shape[0], cost.shape[0], g.shape[0])
    out = [np.empty(m) for _ in range(5)]
    _compare_pass(base, cost, g, *out)
    return out


def payback_year(flows, rate=None):
    """First year from which the cumulative (discounted) flow stays at or above zero.

    A payback that is undone later (a battery replacement, say) does not count: the year
    returned is the one after the last year the cumulative flow is negative. Negative
    means below -1e-9 × max(largest |flow| of the series, 1) (rounding dust is not a
    loss).

    Parameters
    ----------
    flows : array, shape (..., N + 1)
        Net gains by year, year 0 first (an extra up-front cost is negative). [currency]
    rate : float or array, optional
        Discount rate per year for the discounted payback; None for the simple one. [-]

    Returns
    -------
    float or ndarray
        Payback year (0 when the flows never go below zero), NaN when the cumulative flow
        is still negative at the end of the period. [yr]

    Examples
    --------
    >>> payback_year([-100.0, 30.0, 30.0, 50.0, 10.0])
    3.0
    >>> float(payback_year([-100.0, 30.0, 30.0]))
    nan
    """
    f = np.asarray(flows, dtype=float)
    rates = rate
    if rate is not None and not isinstance(_col(rate), float):
        # a rate per series: line it up with the leading axes of the flows
        r = _col(rate)
        lead = np.broadcast_shapes(f.shape[:-1], r.shape[:-1])
        f = np.broadcast_to(f, lead + f.shape[-1:])
        rates = np.broadcast_to(r, lead + (1,)).reshape(-1)
    lead = f.shape[:-1]
    _, _, simple, disc, _ = _run_compare(f.reshape(-1, f.shape[-1]), np.zeros((1, f.shape[-1])),
                                      rates)
    out = (simple if rate is None else disc).reshape(lead)
    return float(out) if out.ndim == 0 else out


class CostComparison(NamedTuple):
    """Result of :func:`compare_costs` (arrays of shape (n,), or floats for one series).

    Attributes
    ----------
    pv_baseline, pv : float or ndarray
        Present values of the baseline's and the compared costs at year 0. [currency]
    simple_payback, discounted_payback : float or ndarray
        Payback years of the savings, as :func:`payback_year` (NaN: not within the
        period). [yr]
    annuity : float or ndarray
        Present value of 1 at the end of each year 1..N, ``Σ_y (1 + r)^-y`` (equals
        ``numpy_financial.pv(r, N, -1)``): the discounted years of a quantity that is the
        same every year, e.g. the distance in a levelized cost. [yr]
    """

    pv_baseline: float | np.ndarray
    pv: float | np.ndarray
    simple_payback: float | np.ndarray
    discounted_payback: float | np.ndarray
    annuity: float | np.ndarray


# --------------------------------------------------------------------------- many draws
@njit(cache=True, nogil=True)
def _fill_block(const, shapes, factors, rest, scale, j0, k, out):
    """Flows of series ``j0..j0+k-1`` (see :class:`FlowParts`) into the years-first block
    ``out``; ``rest`` is (N + 1, n), or (N + 1, 0) when there is none.

    Each year's row is ``const``, plus ``w·a`` for each shape with a non-zero weight that
    year (a one-off shape is zero in all years but one), plus the rest, times the scale
    when it is not 1, in that order; up to four shapes (and the rest and the scale) are
    added in one pass over the row, so the row is written once per four shapes.
    """
    n_groups, n_years = shapes.shape
    live = np.empty(n_groups, dtype=np.int64)
    has_rest = rest.shape[1] > 0
    for y in range(n_years):
        row = out[y, :k]
        m = 0
        for g in range(n_groups):
            if shapes[g, y] != 0.0:
                live[m] = g
                m += 1
        s = scale[y]
        c0 = const[y]
        pos = 0
        first = True
        while True:
            take = min(4, m - pos)
            last = pos + take >= m
            w0 = shapes[live[pos], y] if take > 0 else 0.0
            w1 = shapes[live[pos + 1], y] if take > 1 else 0.0
            w2 = shapes[live[pos + 2], y] if take > 2 else 0.0
            w3 = shapes[live[pos + 3], y] if take > 3 else 0.0
            a0 = factors[live[pos], j0:j0 + k] if take > 0 else rest[y, 0:0]
            a1 = factors[live[pos + 1], j0:j0 + k] if take > 1 else rest[y, 0:0]
            a2 = factors[live[pos + 2], j0:j0 + k] if take > 2 else rest[y, 0:0]
            a3 = factors[live[pos + 3], j0:j0 + k] if take > 3 else rest[y, 0:0]
            r = rest[y, j0:j0 + k] if has_rest else rest[y, 0:0]
            add_rest = last and has_rest
            times = last and s != 1.0
            for i in range(k):
                x = c0 if first else row[i]
                if take > 0:
                    x = x + w0 * a0[i]
                if take > 1:
                    x = x + w1 * a1[i]
                if take > 2:
                    x = x + w2 * a2[i]
                if take > 3:
                    x = x + w3 * a3[i]
                if add_rest:
                    x = x + r[i]
                if times:
                    x = x * s
                row[i] = x
            pos += take
            first = False
            if last:
                break


@njit(cache=True, nogil=True)
def _parts_pass(const, shapes, factors, rest, scale, out):
    """The flows of :class:`FlowParts` years last, ``out`` (m, N + 1)."""
    block = np.empty((out.shape[1], _BLOCK))
    for j0 in range(0, out.shape[0], _BLOCK):
        k = min(_BLOCK, out.shape[0] - j0)
        _fill_block(const, shapes, factors, rest, scale, j0, k, block)
        for i in range(k):
            for y in range(out.shape[1]):
                out[j0 + i, y] = block[y, i]


@njit(cache=True, nogil=True)
def _compare_parts_pass(b_const, b_shapes, b_factors, b_rest, b_scale,
                        c_const, c_shapes, c_factors, c_rest, c_scale,
                        growth, pv_base, pv_cost, simple, discounted, annuity):
    """:func:`_compare_block` for series given as parts: each block of series is formed
    in cache and compared there, so the (n, N + 1) flows are never written to memory."""
    m = simple.shape[0]
    b = np.empty((b_const.shape[0], _BLOCK))
    c = np.empty((b_const.shape[0], _BLOCK))
    v = np.empty(_BLOCK)
    for j0 in range(0, m, _BLOCK):
        k = min(_BLOCK, m - j0)
        _fill_block(b_const, b_shapes, b_factors, b_rest, b_scale, j0, k, b)
        _fill_block(c_const, c_shapes, c_factors, c_rest, c_scale, j0, k, c)
        _rates_block(growth, j0, k, v)
        _compare_block(b, c, v, k, pv_base[j0:], pv_cost[j0:], simple[j0:],
                       discounted[j0:], annuity[j0:])


@njit(cache=True, nogil=True, error_model="numpy")  # x/0: inf or NaN, as numpy
def _compare_parts_levelized(b_const, b_shapes, b_factors, b_rest, b_scale,
                             c_const, c_shapes, c_factors, c_rest, c_scale,
                             growth, dist_b, dist_c, pv_difference, levelized,
                             levelized_base, levelized_difference, simple, discounted):
    """:func:`_compare_parts_pass`, then the outputs of :func:`compare_levelized` worked
    out from each block while it is in cache (the same operations, in the same order, as
    the array form on the results of :func:`compare_costs`). ``dist_b``, ``dist_c``:
    (m,) or (1,)."""
    m = simple.shape[0]
    b = np.empty((b_const.shape[0], _BLOCK))
    c = np.empty((b_const.shape[0], _BLOCK))
    v = np.empty(_BLOCK)
    pv_b = np.empty(_BLOCK)
    pv_c = np.empty(_BLOCK)
    pay_s = np.empty(_BLOCK)
    pay_d = np.empty(_BLOCK)
    ann = np.empty(_BLOCK)
    wide_b = dist_b.shape[0] > 1
    wide_c = dist_c.shape[0] > 1
    for j0 in range(0, m, _BLOCK):
        k = min(_BLOCK, m - j0)
        _fill_block(b_const, b_shapes, b_factors, b_rest, b_scale, j0, k, b)
        _fill_block(c_const, c_shapes, c_factors, c_rest, c_scale, j0, k, c)
        _rates_block(growth, j0, k, v)
        _compare_block(b, c, v, k, pv_b, pv_c, pay_s, pay_d, ann)
        for i in range(k):
            j = j0 + i
            lc_c = pv_c[i] / (dist_c[j if wide_c else 0] * ann[i])
            lc_b = pv_b[i] / (dist_b[j if wide_b else 0] * ann[i])
            pv_difference[j] = pv_c[i] - pv_b[i]
            levelized[j] = lc_c
            levelized_base[j] = lc_b
            levelized_difference[j] = lc_c - lc_b
            simple[j] = np.inf if np.isnan(pay_s[i]) else pay_s[i]
            discounted[j] = np.inf if np.isnan(pay_d[i]) else pay_d[i]


@dataclass(frozen=True)
class FlowParts:
    """Yearly flows of many series (Monte Carlo draws) kept as parts.

    .. math:: F_{j,y} = s_y \\left(c_y + \\sum_g V_{g,y} A_{g,j} + R_{y,j}\\right)

    Most cost lines of a Monte Carlo are a yearly shape (a price path, a one-off year)
    times a per-draw factor (a drawn price or quantity); lines with the same shape share
    one row of ``factors``. Formed only when read (:meth:`years_last`), or block by block
    inside :func:`compare_costs`, so that 100,000 draws × 16 years are not written to
    memory and read back.

    Attributes
    ----------
    const : ndarray, shape (N + 1,)
        The part that is the same in every series, c. [currency]
    shapes : ndarray, shape (G, N + 1)
        Yearly shapes, V. [-]
    factors : ndarray, shape (G, n)
        Per-series factors of each shape, A. [currency]
    rest : ndarray of shape (N + 1, n), or None
        Everything else, years first, R. [currency]
    scale : ndarray, shape (N + 1,)
        Yearly factor on the whole flow, s (e.g. a deflator). [-]
    """

    const: np.ndarray
    shapes: np.ndarray
    factors: np.ndarray
    rest: np.ndarray | None
    scale: np.ndarray

    @property
    def n_series(self) -> int:
        """Number of series (1 when the flows are the same in every series)."""
        if self.rest is not None:
            return self.rest.shape[1]
        return self.factors.shape[1] if len(self.shapes) else 1

    def _kernel_args(self, m: int):
        """Arrays for the compiled loops, for m series (a single series is shared)."""
        if self.n_series == 1 and m > 1 and (len(self.shapes) or self.rest is not None):
            n_years = len(self.const)  # one series shared by all: its flows as the const
            return (self.years_last()[0], np.zeros((0, n_years)), np.zeros((0, 1)),
                    np.zeros((n_years, 0)), np.ones(n_years))
        rest = self.rest if self.rest is not None else np.zeros((len(self.const), 0))
        return (self.const, self.shapes, self.factors, rest, self.scale)

    def years_last(self) -> np.ndarray:
        """The flows, shape (n, N + 1) (C order: each series contiguous). [currency]"""
        out = np.empty((self.n_series, len(self.const)))
        _parts_pass(*self._kernel_args(self.n_series), out)
        return out


def compare_costs(baseline, costs, rate, years_first: bool = False) -> CostComparison:
    """Present values of two yearly cost series and the payback years of the savings.

    .. math:: PV = \\sum_{y=0}^{N} C_y (1 + r)^{-y}, \\qquad
              S_y = C^{baseline}_y - C_y

    and the simple and discounted payback years of the savings ``S`` as
    :func:`payback_year` gives them (and the annuity factor of the rate), in one compiled
    pass over the years of each series (for Monte Carlo draws: no (n, N + 1)
    temporaries).

    Parameters
    ----------
    baseline, costs : array of shape (n, N + 1) or (N + 1,), or FlowParts
        Costs by year, year 0 first; with ``years_first`` the arrays are (N + 1, n) or
        (N + 1, 1) instead (a single column is shared by every series). When both are
        :class:`FlowParts`, each block of series is formed in cache and compared there.
        [currency]
    rate : float or array of shape (n,)
        Discount rate per year. [-]
    years_first : bool
        The arrays have years on the first axis.

    Returns
    -------
    CostComparison
        Floats when every input is a single series given as a 1-D array, else arrays of
        shape (n,).

    Notes
    -----
    The discount factors are built by repeated multiplication, so the values agree with
    :func:`present_value` and :func:`payback_year` to rounding (about 1e-15 relative).

    Examples
    --------
    >>> c = compare_costs([100.0, 60.0, 60.0], [200.0, 10.0, 10.0], 0.0)
    >>> c.pv_baseline, c.pv, c.simple_payback
    (220.0, 220.0, 2.0)
    """
    if isinstance(baseline, FlowParts) and isinstance(costs, FlowParts):
        g = np.atleast_1d(1.0 + np.asarray(rate, dtype=float))
        if len(baseline.const) != len(costs.const):
            raise ValueError("the two series have different numbers of years")
        m = _series_count(baseline.n_series, costs.n_series, g.shape[0])
        out = [np.empty(m) for _ in range(5)]
        _compare_parts_pass(*baseline._kernel_args(m), *costs._kernel_args(m), g, *out)
        return CostComparison(*out)

    def last(a):  # years last, (n, N + 1) or (1, N + 1)
        if isinstance(a, FlowParts):
            return a.years_last()
        a = np.asarray(a, dtype=float)
        if a.ndim == 1:
            return a[None, :]
        return a.T if years_first else a

    single = all(np.ndim(a) == 1 for a in (baseline, costs)) and np.ndim(rate) == 0
    out = _run_compare(last(baseline), last(costs), rate)
    if single:
        return CostComparison(*(float(x[0]) for x in out))
    return CostComparison(*out)


class LevelizedComparison(NamedTuple):
    """Result of :func:`compare_levelized` (arrays of shape (n,)).

    Attributes
    ----------
    present_value_difference : ndarray
        ``pv − pv_baseline``. [currency]
    levelized_cost, baseline_levelized_cost, levelized_cost_difference : ndarray
        Present value over the discounted distance, ``pv / (distance · annuity)``, of the
        compared series and the baseline, and the compared minus the baseline.
        [currency/m]
    simple_payback, discounted_payback : ndarray
        As :class:`CostComparison`, with inf where the savings do not pay back within the
        period (NaN there). [yr]
    """

    present_value_difference: np.ndarray
    levelized_cost: np.ndarray
    baseline_levelized_cost: np.ndarray
    levelized_cost_difference: np.ndarray
    simple_payback: np.ndarray
    discounted_payback: np.ndarray


def compare_levelized(baseline: FlowParts, costs: FlowParts, rate, distance_baseline,
                      distance, out: LevelizedComparison | None = None
                      ) -> LevelizedComparison:
    """:func:`compare_costs` of two :class:`FlowParts` and the levelized costs over a
    distance that is the same in each year 1..N, in one compiled pass.

    .. math:: LC = \\frac{PV}{d \\sum_{y=1}^{N} (1 + r)^{-y}}

    The numbers are those of the array form on the results of :func:`compare_costs`
    (``pv − pv_baseline``, ``pv / (distance · annuity)``, ``where(isnan(payback), inf,
    payback)``), bit for bit, without its (n,) temporaries.

    Parameters
    ----------
    baseline, costs : FlowParts
        Costs by year of the baseline and of the compared series. [currency]
    rate : float or array of shape (n,)
        Discount rate per year. [-]
    distance_baseline, distance : float or array of shape (n,)
        Distance in each year 1..N of the baseline and of the compared series. [m]
    out : LevelizedComparison, optional
        Arrays of shape (n,) to write the results into (contiguous float64); when the
        inputs are a single series (nothing varies across draws), its values fill them.

    Returns
    -------
    LevelizedComparison
        ``out`` when given.

    Examples
    --------
    >>> f = FlowParts(np.array([100.0, 10.0, 10.0]), np.zeros((0, 3)), np.zeros((0, 1)),
    ...               None, np.ones(3))
    >>> g = FlowParts(np.array([150.0, 5.0, 5.0]), np.zeros((0, 3)), np.zeros((0, 1)),
    ...               None, np.ones(3))
    >>> c = compare_levelized(f, g, 0.0, 2.0, 2.0)
    >>> float(c.present_value_difference[0]), float(c.levelized_cost[0])
    (40.0, 40.0)
    """
    g = np.atleast_1d(1.0 + np.asarray(rate, dtype=float))
    if len(baseline.const) != len(costs.const):
        raise ValueError("the two series have different numbers of years")
    d_b = np.atleast_1d(np.asarray(distance_baseline, dtype=float))
    d_c = np.atleast_1d(np.asarray(distance, dtype=float))
    m = _series_count(baseline.n_series, costs.n_series, g.shape[0], d_b.shape[0],
                      d_c.shape[0])
    n = m if out is None else len(out[0])
    if m not in (1, n):
        raise ValueError(f"the inputs have {m} series; out has {n}")
    res = LevelizedComparison(*(np.empty(m) for _ in LevelizedComparison._fields)) \
        if out is None or m != n else out
    _compare_parts_levelized(*baseline._kernel_args(m), *costs._kernel_args(m), g, d_b, d_c,
                             *res)
    if res is not out and out is not None:  # one series for every draw
        for into, value in zip(out, res, strict=True):
            into[...] = value
        return out
    return res


#: Status codes of :func:`irr`.
IRR_STATUS = {
    0: "ok",
    1: "no IRR: the flows never change sign",
    2: "no single IRR: the flows change sign more than once and have several IRRs",
    3: "no IRR between -99 % and 100,000 % per year",
}
_IRR_LO, _IRR_HI = -0.99, 1000.0
_IRR_GRID = 241  # scan points in ln(1 + r) for flows with several sign changes


def _npv_at_log(ct, x):
    """NPV of each series at rates r = e^x - 1, by Horner's rule in v = e^-x.

    ``ct`` is years-first, shape (N + 1, rows), so each step runs over contiguous rows.
    """
    v = np.exp(-x)
    acc = ct[-1].copy()
    for k in range(ct.shape[0] - 2, -1, -1):
        acc *= v
        acc += ct[k]
    return acc


def _bisect(ct, lo, hi):
    """Root of the NPV of each series in [lo, hi] (ln(1 + r)), given a sign change."""
    f_lo = _npv_at_log(ct, lo)
    for _ in range(200):  # bisection halves the bracket past double precision
        mid = 0.5 * (lo + hi)
        f_mid = _npv_at_log(ct, mid)
        same = np.sign(f_mid) == np.sign(f_lo)
        lo = np.where(same, mid, lo)
        f_lo = np.where(same, f_mid, f_lo)
        hi = np.where(same, hi, mid)
        if np.all(hi - lo <= 4e-16 * np.maximum(1.0, np.abs(lo))):
            break
    return np.expm1(0.5 * (lo + hi))


def _sign_changes(c) -> np.ndarray:
    """Changes of sign along each row, zeros skipped."""
    scale = np.max(np.abs(c), axis=1, keepdims=True)
    s = np.where(np.abs(c) > 1e-12 * np.maximum(scale, 1e-300), np.sign(c), 0.0)
    idx = np.where(s != 0, np.arange(s.shape[1]), 0)
    np.maximum.accumulate(idx, axis=1, out=idx)  # carry the last non-zero sign forward
    filled = np.take_along_axis(s, idx, axis=1)
    return np.count_nonzero(filled[:, 1:] * filled[:, :-1] < 0, axis=1)


def irr(flows):
    """Internal rate of return of yearly flows, with a status when there is none.

    The IRR solves :math:`\\sum_y F_y (1 + r)^{-y} = 0`. With one change of sign in the
    flows (ignoring zeros) Descartes' rule of signs gives exactly one root with
    :math:`r > -1`, found by vectorized bisection on :math:`\\ln(1 + r)` (written out here
    because ``numpy_financial.irr`` [1]_ solves one series at a time, which is too slow for
    Monte Carlo draws; the result is checked against it). For rows with several sign
    changes the NPV is scanned on 241 points of :math:`\\ln(1 + r)` between -99 % and
    100,000 %: one bracket is refined the same way, several give status 2 (two roots
    closer than the grid spacing, about 3 % in 1 + r, can be missed).

    Parameters
    ----------
    flows : array, shape (..., N + 1)
        Flows by year, year 0 first. [currency]

    Returns
    -------
    rate : float or ndarray
        IRR per year, NaN where there is none. [-]
    status : int or ndarray of int
        Code in :data:`IRR_STATUS` (0: ok).

    Examples
    --------
    >>> r, s = irr([-100, 39, 59, 55, 20])
    >>> round(float(r), 10), int(s)
    (0.2809484212, 0)
    >>> irr([100.0, 50.0])[1]
    1
    """
    f = np.asarray(flows, dtype=float)
    shape = f.shape[:-1]
    c = f.reshape(-1, f.shape[-1])
    changes = _sign_changes(c)
    rate = np.full(len(c), np.nan)
    status = np.where(changes == 0, 1, 0)

    x_lo, x_hi = np.log1p(_IRR_LO), np.log1p(_IRR_HI)
    one = np.flatnonzero(changes == 1)
    if one.size:  # exactly one root with r > -1 (Descartes); is it in range?
        ct = np.ascontiguousarray(c[one].T)
        lo, hi = np.full(one.size, x_lo), np.full(one.size, x_hi)
        inside = np.sign(_npv_at_log(ct, lo)) != np.sign(_npv_at_log(ct, hi))
        rate[one] = np.where(inside, _bisect(ct, lo, hi), np.nan)
        status[one] = np.where(inside, 0, 3)

    many = np.flatnonzero(changes > 1)
    if many.size:  # scan a grid in ln(1 + r) for brackets, then bisect the single ones
        ct = np.ascontiguousarray(c[many].T)
        grid = np.linspace(x_lo, x_hi, _IRR_GRID)
        powers = np.exp(-np.outer(grid, np.arange(ct.shape[0])))  # (grid, N + 1)
        signs = np.sign(powers @ ct)  # NPV at every grid rate, one matrix product
        flips = signs[1:] * signs[:-1] < 0  # (grid - 1, rows)
        exact = (signs == 0).any(axis=0)
        n_roots = flips.sum(axis=0)
        single = (n_roots == 1) & ~exact
        k = np.argmax(flips, axis=0)
        if single.any():
            sel = np.flatnonzero(single)
            rate[many[sel]] = _bisect(ct[:, sel], grid[k[sel]], grid[k[sel] + 1])
        status[many] = np.where(single, 0, np.where((n_roots > 1) | exact, 2, 3))
    if not shape:
        return float(rate[0]), int(status[0])
    return rate.reshape(shape), status.reshape(shape)


def irr_roots(c) -> list[float]:
    """All IRRs of one series between -99 % and 100,000 %, from the polynomial's roots.

    Parameters
    ----------
    c : array, shape (N + 1,)
        Flows by year, year 0 first. [currency]

    Returns
    -------
    list of float
        Rates per year, ascending. [-]
    """
    c = np.asarray(c, dtype=float)
    nz = np.flatnonzero(c)
    if nz.size == 0:
        return []
    c = c[nz[0]: nz[-1] + 1]
    v = np.roots(c[::-1])  # sum c_t v^t, highest power first
    v = v[(np.abs(v.imag) < 1e-9 * np.maximum(1.0, np.abs(v.real))) & (v.real > 0)].real
    r = 1.0 / v - 1.0
    return sorted(float(x) for x in r if _IRR_LO <= x <= _IRR_HI)


# --------------------------------------------------------------------------- break-even
@dataclass(frozen=True)
class BreakEven:
    """A break-even value, or None with the reason.

    Attributes
    ----------
    value : float or None
        The input value at which the difference is zero. [unit of the input]
    note : str
        "" when found; otherwise why not.
    """

    value: float | None
    note: str = ""


def find_break_even(diff_many, diff_one, lo: float, hi: float, base: float | None = None,
                    n_grid: int = 129, tol: float = 1e-6,
                    range_text: str | None = None) -> BreakEven:
    """Root of a cost difference in [lo, hi]: grid bracket search, then Brent's method.

    The difference is evaluated on ``n_grid`` points in one vectorized call
    (``diff_many``); of the brackets where it changes sign, the one nearest ``base`` is
    refined with ``scipy.optimize.brentq`` on ``diff_one``. A root where the difference
    *jumps* across zero (a step, e.g. one battery replacement more) is not a break-even
    and is reported as such.

    Parameters
    ----------
    diff_many : callable
        ``diff_many(x: ndarray (k,)) -> ndarray (k,)``. [currency]
    diff_one : callable
        ``diff_one(x: float) -> float``. [currency]
    lo, hi : float
        Search range. [unit of x]
    base : float, optional
        The case's own value, to choose among several roots. [unit of x]
    n_grid : int
        Grid points for the bracket search.
    tol : float
        Largest accepted |difference| at the root, relative to the difference's size over
        the range. [-]
    range_text : str, optional
        How to name the range in the "no break-even" note (default: "lo and hi").

    Returns
    -------
    BreakEven
    """
    x = np.linspace(lo, hi, n_grid)
    if base is not None and lo < base < hi:
        x = np.unique(np.append(x, base))
    d = np.asarray(diff_many(x), dtype=float)
    size = max(float(np.max(np.abs(d))), 1e-300)
    zero = np.flatnonzero(np.abs(d) <= 1e-12 * size)
    brackets = np.flatnonzero(np.sign(d[:-1]) * np.sign(d[1:]) < 0)
    if np.all(np.abs(d) <= 1e-12 * size):
        return BreakEven(None, "the costs are equal over the whole range")
    candidates = [(float(x[k]), float(x[k])) for k in zero]
    candidates += [(float(x[k]), float(x[k + 1])) for k in brackets]
    if not candidates:
        within = range_text or f"{fm.number(lo)} and {fm.number(hi)}"
        return BreakEven(None, f"no break-even between {within}")
    ref = base if base is not None else 0.5 * (lo + hi)
    candidates.sort(key=lambda ab: min(abs(ab[0] - ref), abs(ab[1] - ref)))
    for a, b in candidates:
        root = a if a == b else brentq(diff_one, a, b, xtol=1e-12 * max(1.0, abs(b)),
                                       rtol=4 * np.finfo(float).eps, maxiter=200)
        if abs(diff_one(root)) <= tol * size:
            return BreakEven(float(root))
    return BreakEven(None, "the difference jumps across zero (a step such as one more "
                           f"replacement) near {fm.number(candidates[0][1])}; no exact "
                           "break-even")
