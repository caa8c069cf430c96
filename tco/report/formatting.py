"""Numbers and units for people: the one place where a figure becomes text.

Every human-facing output (PDF, HTML, console, the batch and fleet reports, the
workbook's display formats) formats its figures here, so a figure reads the same
wherever it is shown:

- money carries the scenario's ISO 4217 code and thousands separators (``19,955 EUR``);
- unit prices read as currency per unit (``1.480 EUR/L``, ``0.058 EUR/kWh``,
  ``11.50 EUR/kW·month``);
- rates and shares read as percentages (``4.5 %``);
- decimals follow the magnitude (about three significant figures, never fewer than the
  whole part) and no scientific notation is ever written;
- lengths, speeds, masses, volumes and temperatures are shown in the study's unit system
  (``study.units``: ``"metric"`` or ``"us"``), converted with the exact factors of
  :mod:`tco.units`.

Models keep SI and return numbers; the sentences a reader sees are written by the report
layer with these functions.
"""
from __future__ import annotations

import math
import re

from tco.units import J_PER_KWH, from_si

__all__ = [
    "DASH", "number", "money", "signed_money", "percent", "unit_price", "per_unit_label",
    "quantity", "Units", "input_value", "label_from_description", "field_label", "hours_text",
    "irr_text", "range_text", "client_line", "EXCEL_FORMATS", "kwh", "kw", "minutes",
    "seconds", "count", "tonnes", "per_year", "years_list", "compact_number", "clock",
    "signed_percent", "plain", "data_size", "figure_spans",
]

#: Shown for a missing or non-finite figure.
DASH = "–"


def _finite(x) -> bool:
    try:
        return x is not None and not isinstance(x, bool) and math.isfinite(float(x))
    except (TypeError, ValueError):
        return False


def auto_digits(x: float, significant: int = 3, most: int = 6) -> int:
    """Decimals that show ``x`` to about ``significant`` figures (0 for |x| ≥ 10^(s-1))."""
    ax = abs(float(x))
    if ax == 0 or not math.isfinite(ax):
        return 0
    return int(min(most, max(0, significant - 1 - math.floor(math.log10(ax)))))


def number(x, digits: int | None = None, trim: bool = False) -> str:
    """A number with thousands separators, decimals by magnitude, never in e-notation.

    Parameters
    ----------
    x : float or None
    digits : int, optional
        Fixed number of decimals; by default about three significant figures.
    trim : bool
        With automatic decimals, write a whole number without decimals (``8`` not
        ``8.00``); for single values, not for columns that should align.

    Examples
    --------
    >>> number(212345.6), number(1.4567), number(0.0452036), number(None)
    ('212,346', '1.46', '0.0452', '–')
    """
    if not _finite(x):
        return DASH
    x = float(x)
    d = auto_digits(x) if digits is None else digits
    if trim and digits is None and x == round(x):
        d = 0
    text = f"{x:,.{d}f}"
    return "0" if text in ("-0", "-0." + "0" * d) else text


def money(x, currency: str, digits: int = 0) -> str:
    """An amount with thousands separators and its ISO 4217 code: ``19,955 EUR``."""
    text = number(x, digits)
    return text if text == DASH else f"{text} {currency}"


def signed_money(x, currency: str, digits: int = 0) -> str:
    """An amount with an explicit sign (``+1,200 EUR``, ``-300 EUR``)."""
    if not _finite(x):
        return DASH
    text = money(x, currency, digits)
    return text if float(x) < 0 or text.startswith("0 ") else "+" + text


def percent(share, digits: int = 1) -> str:
    """A share (0.045) as a percentage (``4.5 %``)."""
    if not _finite(share):
        return DASH
    if float(share) == 0:
        return "0 %"
    return f"{number(100.0 * float(share), digits)} %"


_SUPERSCRIPT = str.maketrans("-0123456789", "⁻⁰¹²³⁴⁵⁶⁷⁸⁹")


def plain(x, significant: int | None = None) -> str:
    """A value as a person would type it, for messages: the shortest decimal that reads
    back as ``x`` (``0.5``, ``1,250``, ``-3``), never e-notation; beyond 10^15 in size, its
    order of magnitude (``about 10¹⁸``), so a hostile number cannot flood a line.

    ``significant``: first round ``x`` to that many significant figures (a fitted
    parameter shown as ``0.333333``, not ``0.3333333333333333``).

    >>> plain(0.5), plain(1250.0), plain(-3.0), plain(1e12), plain(1e18), plain(2.5e-7)
    ('0.5', '1,250', '-3', '1,000,000,000,000', 'about 10¹⁸', '0.00000025')
    >>> plain(-0.25), plain(12345.5), plain(1 / 3, significant=6), plain(2e-7 / 3, 3)
    ('-0.25', '12,345.5', '0.333333', '0.0000000667')
    """
    if not _finite(x):
        return str(x)
    x = float(x)
    if significant is not None:
        x = float(f"{x:.{int(significant)}g}")  # correctly rounded decimal, read back
    if abs(x) >= 1e15:
        sign = "-" if x < 0 else ""
        return f"{sign}about 10{str(int(math.floor(math.log10(abs(x))))).translate(_SUPERSCRIPT)}"
    if x == int(x):
        return f"{int(x):,}"
    text = repr(x)
    if "e" in text or "E" in text:
        import numpy as np

        text = np.format_float_positional(x, trim="-")
    whole, _, frac = text.partition(".")
    return f"{int(whole):,}".replace("0", "-0", 1 if whole == "-0" else 0) + "." + frac


def data_size(n_bytes) -> str:
    """A size in bytes in binary units, two significant figures below 10 of a unit, whole
    ones above: ``34 GiB``, ``1.7 GiB``, ``4 MiB`` (an exact whole number of units),
    ``512 bytes``.

    >>> data_size(34 * 2**30), data_size(1.7 * 2**30), data_size(4 * 2**20), data_size(512)
    ('34 GiB', '1.7 GiB', '4 MiB', '512 bytes')
    """
    if not _finite(n_bytes):
        return DASH
    n_bytes = float(n_bytes)
    for unit, scale in (("TiB", 2**40), ("GiB", 2**30), ("MiB", 2**20), ("KiB", 2**10)):
        if abs(n_bytes) >= scale:
            v = n_bytes / scale
            return f"{number(v, 0 if abs(v) >= 10 or v.is_integer() else 1)} {unit}"
    return f"{number(n_bytes, 0)} bytes"


def count(n) -> str:
    """A whole count with thousands separators (``1,250``)."""
    return number(n, 0)


def kwh(joules, digits: int = 0) -> str:
    """Energy [J] in kWh: ``kwh(3.6e8)`` → ``'100 kWh'``."""
    return DASH if not _finite(joules) else f"{number(float(joules) / J_PER_KWH, digits)} kWh"


def kw(watts, digits: int = 0) -> str:
    """Power [W] in kW: ``kw(150e3)`` → ``'150 kW'``."""
    return DASH if not _finite(watts) else f"{number(float(watts) / 1000.0, digits)} kW"


def minutes(s, digits: int = 0) -> str:
    """A duration [s] in minutes: ``minutes(1500)`` → ``'25 min'``."""
    return DASH if not _finite(s) else f"{number(float(s) / 60.0, digits)} min"


def seconds(s, digits: int = 0) -> str:
    """A duration [s] in seconds: ``seconds(42.4)`` → ``'42 s'``."""
    return DASH if not _finite(s) else f"{number(s, digits)} s"


def tonnes(kg, digits: int = 0) -> str:
    """A mass of CO2e or goods [kg] in tonnes: ``tonnes(122400)`` → ``'122 t'``."""
    return DASH if not _finite(kg) else f"{number(float(kg) / 1000.0, digits)} t"


def per_year(text: str) -> str:
    """A formatted amount per year: ``per_year('1,200 EUR')`` → ``'1,200 EUR/year'``."""
    return text if text == DASH else f"{text}/year"


def years_list(years) -> str:
    """Years of the study as a list: ``[4, 8]`` → ``'4, 8'``."""
    return ", ".join(str(int(y)) for y in years)


def compact_number(x, _pos=None) -> str:
    """A chart tick label with thousands shortened (``1500`` → ``'1.5k'``, ``2_500_000``
    → ``'2.5M'``), a true minus sign, never e-notation (``0.00001`` → ``'0.00001'``).
    The second argument lets matplotlib's ``FuncFormatter`` call it."""
    if not _finite(x):
        return ""
    x = float(x)
    ax = abs(x)
    for factor, suffix in ((1e9, "G"), (1e6, "M"), (1e3, "k")):
        if ax >= factor:
            v = x / factor
            return f"{number(v, 0 if v.is_integer() else 1)}{suffix}".replace("-", "\u2212")
    if ax == 0:
        return "0"
    text = number(x, trim=True)
    if "." in text:  # a tick reads 0.25, not 0.250
        text = text.rstrip("0").rstrip(".")
    return text.replace("-", "\u2212")


def clock(hour) -> str:
    """An hour of the day as a clock time: ``clock(22)`` → ``'22:00'``, ``clock(25)``
    → ``'01:00'``."""
    return f"{int(round(float(hour))) % 24:02d}:00"


def signed_percent(share, digits: int = 1) -> str:
    """A change as a percentage with its sign: ``signed_percent(0.123)`` → ``'+12.3 %'``."""
    text = percent(share, digits)
    return text if text == DASH or text.startswith(("-", "0 ")) else "+" + text


# --------------------------------------------------------------------------- line breaks
#: A figure and the unit (or word) after it, which a page or screen must not break apart:
#: ``684,568 EUR``, ``25.14 EUR/kW·month``, ``751 t CO2e``, ``12.5 US gal``, ``13.5 %``,
#: ``0.81 × scenario``, ``−150k``. A number inside a word (``CO2e``) is not a figure.
_FIGURE_AND_UNIT = re.compile(
    r"(?<![\w.,·/])[-+\u2212]?\d[\d,]*(?:\.\d+)?"
    r" (?:%|× [^\s,;:()]+|(?:US gal|(?:[A-Z]{3}/)?(?:k?g|t) CO2e)[^\s,;:()]*"
    r"|[A-Za-zµ°][^\s,;:()]*)")


def figure_spans(text: str) -> list[tuple[int, int]]:
    """Where ``text`` has a figure followed by its unit, as ``(start, end)`` slices, for
    the HTML and PDF to keep each on one line (:func:`tco.report.html.nobreak`). The text
    itself is unchanged: the workbook, console and JSON read the same words.

    >>> t = "Demand charge 25.14 EUR/kW·month; 751 t CO2e over 10 years; CO2e 2 %"
    >>> [t[a:b] for a, b in figure_spans(t)]
    ['25.14 EUR/kW·month', '751 t CO2e', '10 years', '2 %']
    >>> t = "abatement -129 EUR/t CO2e, 27.3 g CO2e/t·km"
    >>> [t[a:b] for a, b in figure_spans(t)]
    ['-129 EUR/t CO2e', '27.3 g CO2e/t·km']
    """
    return [m.span() for m in _FIGURE_AND_UNIT.finditer(text or "")]


# --------------------------------------------------------------------------- units
#: Display unit in each system for the units the scenario documents its fields in
#: (pint spelling → (pint unit, label)). Units not listed are shown as written.
_DISPLAY = {
    "metric": {
        "km": ("km", "km"), "m": ("m", "m"), "km/h": ("km/h", "km/h"), "t": ("t", "t"),
        "kg": ("kg", "kg"), "L": ("L", "L"), "L/h": ("L/h", "L/h"), "degC": ("degC", "°C"),
        "m^2": ("m^2", "m²"), "m/s^2": ("m/s^2", "m/s²"), "kg/L": ("kg/L", "kg/L"),
        "g/kWh": ("g/kWh", "g/kWh"), "kWh": ("kWh", "kWh"), "kW": ("kW", "kW"),
        "kW/K": ("kW/K", "kW/K"), "MJ/kg": ("MJ/kg", "MJ/kg"), "s": ("s", "s"),
        "min": ("min", "min"), "h": ("h", "h"), "s/m": ("s/m", "s/m"),
        "kg/kWh": ("kg/kWh", "kg/kWh"), "yr": ("yr", "years"),
    },
    "us": {
        "km": ("mi", "mi"), "m": ("ft", "ft"), "km/h": ("mph", "mph"), "t": ("lb", "lb"),
        "kg": ("lb", "lb"), "L": ("gal", "US gal"), "L/h": ("gal/h", "US gal/h"),
        "degC": ("degF", "°F"), "m^2": ("ft^2", "ft²"), "m/s^2": ("ft/s^2", "ft/s²"),
        "kg/L": ("lb/gal", "lb/US gal"), "s/m": ("s/mi", "s/mi"),
    },
}
#: Money per unit: the unit a price is shown per in each system.
_PER = {
    "metric": {"km": "km", "L": "L", "kWh": "kWh", "kW": "kW", "h": "h", "t": "t"},
    "us": {"km": "mi", "L": "gal", "kWh": "kWh", "kW": "kW", "h": "h", "t": "ton"},
}
_PER_LABEL = {"gal": "US gal", "ton": "short ton"}


class Units:
    """The study's unit system: ``Units("metric")`` or ``Units("us")``."""

    def __init__(self, system: str = "metric"):
        self.system = "us" if system == "us" else "metric"
        self.us = self.system == "us"
        self.label = "US customary" if self.us else "metric"
        self.dist = "mi" if self.us else "km"
        self.speed = "mph" if self.us else "km/h"
        self.elev = "ft" if self.us else "m"
        self.mass = "lb" if self.us else "t"
        self.volume = "US gal" if self.us else "L"
        # metres per display distance unit (exact: tco.units)
        self.per_dist = float(from_si(1.0, "1/mi" if self.us else "1/km"))

    def distance(self, m: float) -> float:
        """Metres in the display distance unit."""
        return m / self.per_dist

    def per_distance(self, si_per_m: float) -> float:
        """A quantity per metre, per display distance unit."""
        return si_per_m * self.per_dist

    def convert(self, value_si: float, unit: str) -> tuple[float, str]:
        """An SI value in the display unit for a field documented in ``unit``."""
        unit_, label = _DISPLAY[self.system].get(unit) or _DISPLAY["metric"].get(
            unit, (unit, unit))
        try:
            return float(from_si(value_si, unit_)), label
        except Exception:  # noqa: BLE001 - a label-only unit ("%", "1/yr")
            return float(value_si), label

    def quantity(self, value_si, unit: str, digits: int | None = None) -> str:
        """An SI value as display text: ``quantity(22000, "t")`` → ``'22.0 t'``."""
        if not _finite(value_si):
            return DASH
        v, label = self.convert(value_si, unit)
        return f"{number(v, digits, trim=digits is None)} {label}".strip()


def quantity(value_si, unit: str, system: str = "metric", digits: int | None = None) -> str:
    """An SI value shown in ``system`` (see :class:`Units`)."""
    return Units(system).quantity(value_si, unit, digits)


def per_unit_label(per: str, currency: str, system: str = "metric") -> str:
    """``EUR/L`` (metric) or ``USD/US gal`` (US) for a price per ``per``."""
    if per in ("kW·month", "kW/month"):
        return f"{currency}/kW·month"
    shown = _PER.get(system, _PER["metric"]).get(per, per)
    return f"{currency}/{_PER_LABEL.get(shown, shown)}"


def unit_price(price_per_unit: float, per: str, currency: str, system: str = "metric",
               digits: int | None = None) -> str:
    """A price given per metric ``per`` (km, L, kWh, t), shown in ``system``.

    ``price_per_unit`` is currency per metric unit (per km, per L); in US units it is
    converted to per mile, per US gallon.
    """
    if not _finite(price_per_unit):
        return DASH
    shown = _PER.get(system, _PER["metric"]).get(per, per)
    value = float(price_per_unit)
    if shown != per and per not in ("kW·month",):
        # currency per metric unit → per shown unit: times (shown unit ÷ metric unit)
        value = value * float(from_si(1.0, per)) / float(from_si(1.0, shown))
    if digits is None:
        digits = max(2, auto_digits(value)) if abs(value) < 100 else 0
    return f"{number(value, digits)} {per_unit_label(per, currency, system)}"


# --------------------------------------------------------------------------- inputs
_PERCENT_NAMES = re.compile(
    r"(rate|share|efficiency|escalation|escalation\.[a-z_]+|reserve|start_soc|state_of_health|"
    r"inflation|def_ratio|default_swing|percent_grade|grade|change|renewable_share|"
    r"td_loss|urea_share)$")
_NOT_PERCENT = re.compile(r"(idle_fuel_rate|payments_per_year|declining_balance_percent)$")


def is_percent_field(key: str, unit: str) -> bool:
    """Whether an input is a rate or share shown as a percentage."""
    leaf = key.rsplit(".", 1)[-1]
    if _NOT_PERCENT.search(key):
        return False
    if unit in ("percent", "%"):
        return True
    return unit in ("", "-") and bool(_PERCENT_NAMES.search(key) or _PERCENT_NAMES.search(
        leaf))


def _money_per(unit: str) -> str | None:
    """For a price unit (``"1/km"``, ``"currency/yr"``) the unit it is per."""
    if unit.startswith("currency/"):
        return unit.split("/", 1)[1]
    if unit.startswith("1/") and unit not in ("1/yr", "1/K"):  # per year, per kelvin
        return unit[2:]
    return None


def input_value(value, unit: str, key: str, currency: str, system: str = "metric") -> str:
    """An input as written by :func:`tco.scenario.base.field_sources` (SI), for reading.

    Parameters
    ----------
    value : float, int, str, bool, list or None
        The validated (SI) value.
    unit : str
        The field's documented unit (``"km"``, ``"1/L"``, ``"currency"``, ``""``).
    key : str
        The field's path (``"finance.discount_rate"``), used to tell rates from counts.
    """
    if value is None:
        return DASH
    if isinstance(value, bool):
        return "yes" if value else "no"
    if isinstance(value, str):
        # choice words read as words ("declining_balance"); names and codes stay as written
        return value.replace("_", " ") if re.fullmatch(r"[a-z]+(_[a-z]+)+", value) else value
    if isinstance(value, int):  # counts, years and hours are not converted (mfield)
        if key.endswith("_hour"):
            return f"{value:02d}:00"
        if key.endswith(("year", "seed")):
            return str(value)
        label = {"yr": "years", "h": "h", "%": "%"}.get(unit, "")
        return f"{number(value, 0)} {label}".strip()
    if isinstance(value, (list, tuple)):
        if key.endswith("hours") and all(isinstance(v, int) for v in value):
            return hours_text(value)
        if not value:
            return "none"
        if len(value) > 12:
            return f"{len(value)} values"
        return ", ".join(input_value(v, unit, key, currency, system) for v in value)
    if not _finite(value):
        return DASH
    if unit == "currency":
        return money(value, currency, 0 if abs(value) >= 100 or value == round(value) else 2)
    per = _money_per(unit)
    if per is not None:
        if per == "month" or per == "yr":
            whole = abs(value) >= 100 or value == round(value)
            return f"{money(value, currency, 0 if whole else 2)}/" \
                   f"{'month' if per == 'month' else 'year'}"
        price_metric = float(from_si(value, "1/" + per))
        if key.endswith("demand_charge"):
            return unit_price(price_metric, "kW·month", currency, system)
        return unit_price(price_metric, per, currency, system)
    if is_percent_field(key, unit):
        share = float(value)
        return percent(share, 2 if abs(share) < 0.01 else 1)
    if unit in ("", "-"):
        return number(value, trim=True)
    if unit == "%":
        return f"{number(value)} %"
    return Units(system).quantity(value, unit)


_BRACKET = re.compile(r"\s*\[[^\]]*\]\s*$")
_FRACTION = re.compile(r"\s*\((fraction|share)[^)]*\)")
#: An input's bound in its description ("(at most 500 t)"): for the validator, not a
#: label; it would also name a metric unit in a US report.
_LIMIT = re.compile(r"\s*\((at most|up to) [^)]*\)")
#: Labels for choice fields, whose descriptions list the choices rather than name them.
CHOICE_LABELS = {
    "powertrain": "Powertrain", "method": "Method", "fuel_model": "Fuel model",
    "residual.method": "Residual value method", "financing.method": "Financing",
    "battery_replacement.when": "Battery replacement", "money_basis": "Money basis",
    "diesel_factors": "Diesel emission factor set", "gwp": "Global warming potential set",
    "hourly_profile_kind": "Hourly profile kind", "beyond_period":
    "Loan or lease running past the period", "units": "Unit system",
    "depreciation": "Tax depreciation method", "lease_end": "At the end of the lease",
    "study.currency": "Currency (ISO 4217 code) of every amount",
}
_CURRENCY_PAREN = re.compile(r"\s*\((currency per [^)]*)\)")


def field_label(key: str, description: str) -> str:
    """The reader's label of an input: a choice field's name, else its description."""
    parts = key.split(".")
    for n in (2, 1):
        k = ".".join(parts[-n:])
        k = re.sub(r"\[\d+\]", "", k)
        if k in CHOICE_LABELS:
            return CHOICE_LABELS[k]
    return label_from_description(description)


def label_from_description(description: str) -> str:
    """A field's description without its unit bracket, as a table label.

    ``"Maintenance and repair per distance (currency per km) [1/km]"`` →
    ``"Maintenance and repair per distance"``. Only the first clause of a long
    description is kept (up to a semicolon).
    """
    text = _BRACKET.sub("", description or "").strip()
    text = _CURRENCY_PAREN.sub("", text)
    text = _FRACTION.sub("", text)
    text = _LIMIT.sub("", text)
    text = text.split("; ")[0].strip()
    if text.count("(") > text.count(")"):  # a parenthesis cut by the semicolon
        text = text[:text.rindex("(")].strip()
    if len(text) > 70:  # long: the parenthetical detail stays in the workbook's notes
        text = re.sub(r"\s*\([^()]*\)", "", text).strip()
    text = _without_keys(text)
    return text[:1].upper() + text[1:] if text else text


#: A machine name in a description: another field (``tax_credit_year``), a choice
#: (``as_financed``) or a command-line option (``--out``).
_MACHINE_NAME = re.compile(r"(?<![\w-])(?:[a-z][a-z0-9]*_[a-z0-9_]+|--[a-z][\w-]*)")
#: Where a label may end before the clause that names one.
_CLAUSE = re.compile(r"(?:: |\. |, | \(| in | to | under | over | with )")


def _without_keys(text: str) -> str:
    """A label up to the clause that names a machine name, which the reader's label
    leaves to the workbook and summary.json (``"Tax credit received in
    tax_credit_year"`` → ``"Tax credit received"``); unchanged if no clause boundary
    comes before the name."""
    m = _MACHINE_NAME.search(text)
    if not m:
        return text
    cuts = [c.start() for c in _CLAUSE.finditer(text, 0, m.start()) if c.start() > 0]
    return text[:cuts[-1]].rstrip(" ,:;.") if cuts else text


def hours_text(hours) -> str:
    """Hours of the day as clock ranges: ``[22, 23, 0, 1]`` → ``'22:00–02:00'``."""
    hs = sorted(set(int(h) % 24 for h in hours))
    if not hs:
        return "none"
    if len(hs) == 24:
        return "all day"
    runs, start = [], hs[0]
    prev = start
    for h in hs[1:] + [None]:
        if h is not None and h == prev + 1:
            prev = h
            continue
        runs.append((start, prev + 1))
        if h is not None:
            start = prev = h
    if len(runs) > 1 and runs[0][0] == 0 and runs[-1][1] == 24:  # wraps past midnight
        runs = [(runs[-1][0], runs[0][1])] + runs[1:-1]
    return ", ".join(f"{a:02d}:00–{b % 24:02d}:00" for a, b in runs)


def range_text(low: str, high: str) -> str:
    """Two formatted values as a range with their unit written once.

    ``range_text("1.18 EUR/L", "1.78 EUR/L")`` → ``'1.18 – 1.78 EUR/L'``.
    """
    a, b = low.split(" "), high.split(" ")
    k = 0
    while k < min(len(a), len(b)) - 1 and a[-1 - k] == b[-1 - k]:
        k += 1
    if k == 0:
        return f"{low} – {high}"
    return f"{' '.join(a[:-k])} – {high}"


def irr_reads_na(irr, payback_year=None, check_payback: bool = False) -> bool:
    """Whether an internal rate of return is shown as ``n/a`` (:func:`irr_text`): no
    finite rate, or, with ``check_payback``, a negative rate on an extra investment that
    is never paid back (no ``payback_year``). Writers that keep the number (workbooks)
    ask this so they read a rate as the reports do."""
    return not _finite(irr) or (check_payback and payback_year is None and float(irr) < 0)


def irr_text(irr, reason: str | None = None, payback_year=None,
             check_payback: bool = False) -> str:
    """An internal rate of return as a percentage, or ``n/a`` with the reason.

    With ``check_payback``, a negative rate on an extra investment that is never paid
    back (no ``payback_year``) is shown as ``n/a``: the savings never recover the extra
    cost, so no rate of return describes it (a "−60 %" would read as a figure to weigh).
    """
    if not irr_reads_na(irr, payback_year, check_payback):
        return percent(irr, 1)
    if _finite(irr):
        reason = reason or "the savings never recover the extra cost"
    return f"n/a ({reason})" if reason else "n/a"


def client_line(row: dict) -> str:
    """One console line for a finished batch client (a row of the batch index).

    ``Acme Haulage: Electric tractor cheaper by 75,203 EUR over the period (present
    value); avoids 743 t CO2e`` or ``bad.toml: skipped: <error>``.
    """
    if row.get("status") != "ok":
        return f"{row.get('file')}: skipped: {row.get('error')}"
    name = row.get("study") or row.get("file")
    diff = row.get("present_value_difference")
    cur = row.get("currency") or ""
    if not _finite(diff):
        verdict = "no comparison"
    elif float(diff) < 0:
        verdict = f"{row['truck']} cheaper by {money(-float(diff), cur)}"
    elif float(diff) > 0:
        verdict = f"{row['truck']} dearer by {money(float(diff), cur)}"
    else:
        verdict = "both cost the same"
    avoided = row.get("avoided_t_co2e")
    tail = f"; avoids {number(avoided, 0)} t CO2e" if _finite(avoided) else ""
    return f"{name}: {verdict} (present value){tail}"


#: Number formats shared with the workbook (spreadsheet syntax), by kind.
EXCEL_FORMATS = {
    "money": '#,##0 "{cur}";-#,##0 "{cur}"',
    "money_cents": '#,##0.00 "{cur}"',
    "unit_price": '0.000 "{cur}/{per}"',
    "percent": "0.0 %",
    "number": "#,##0",
    "number_1": "#,##0.0",
    "number_3": "#,##0.000",
}
