"""Building blocks of the scenario schema: quantity fields with units and cited defaults.

A quantity field accepts a plain number in its documented default unit or a string with
units; after validation it holds a float in SI. Every field records its default unit and
where its default comes from, so the report can list every assumption with its source.

Bounds live beside each field, in its declared unit:

* **hard bounds** — ``Qty(unit, ge=, gt=, le=, lt=)`` for quantities, ``ge=`` / ``le=`` of
  ``mfield`` for counts: a value outside is refused with one line;
* **usual range** — ``qfield(..., usual=(low, high))`` (either may be ``None``): a value
  outside is accepted and named in the report's warnings (:func:`unusual_values`);
* **hard bounds a custom validator enforces** (a rate's band, a calendar year, a budget) —
  declared with ``qfield(..., bounds=(low, high))`` so that they are documented beside the
  field like the others (``tests/test_field_bounds.py`` checks that each declared bound is
  enforced);
* **usual range sources** (an amount or price of 0, which leaves a cost out, is never
  unusual) — ``usual_source=`` says where a usual range comes from (a
  published figure, "common practice" or "from memory"); a numeric field with no sensible
  usual range says why with ``usual="none: …"``. Money usual ranges are written for
  currencies worth roughly one US dollar (:data:`DOLLAR_LIKE`) and are checked only in
  those; a currency of another size is held to the hard bounds alone;
* **rules every field gets** (:meth:`Section._plausible`, so a new field needs nothing
  extra): numbers are finite; money (unit ``currency…``) and prices (unit ``1/…``) are at
  most :data:`MONEY_CEILING` in the scenario's currency; whole numbers are at most
  :data:`INT_CEILING`; text has its control characters replaced by U+FFFD and is at most
  :data:`TEXT_LIMIT` characters, or ``qfield(..., text_limit=N, multiline=True)``.
"""
from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Annotated, Any

from pydantic import (
    AfterValidator,
    BaseModel,
    BeforeValidator,
    ConfigDict,
    Field,
    ValidationInfo,
    field_validator,
)

from tco.report import formatting as fm
from tco.text import clean_text
from tco.units import UnitError, to_si

#: Marker for defaults that are the tool's own assumptions (no published source).
ASSUMPTION = "assumption (tool default; replace with your own figure)"

#: The largest amount of money, or price per unit, accepted in any field, in the
#: scenario's currency: ten trillion. Far above any truck, depot or fleet in any currency
#: (a heavy truck is about 1e5–1e6 in USD or EUR, about 1e9–1e10 in the currencies with
#: the smallest units), and far below where sums over years and draws lose precision. [-]
MONEY_CEILING = 1e13
#: The largest whole number accepted where a field sets no bound of its own (2**53, the
#: largest integer a float holds exactly). [-]
INT_CEILING = 2**53
#: The longest text accepted in a one-line field (names, labels, choices) unless the
#: field sets ``text_limit``. [characters]
TEXT_LIMIT = 200
#: Currencies in which the money usual ranges (written in US dollars or euros, which are
#: within a factor of about two of these) are checked. [ISO 4217 codes]
DOLLAR_LIKE = frozenset({"USD", "EUR", "GBP", "CHF", "CAD", "AUD", "NZD", "SGD"})


@dataclass(frozen=True)
class Bounds:
    """The hard limits of a quantity field in its declared unit, kept in the field's type
    (:func:`Qty`) so that they can be listed (:func:`field_limits`)."""

    ge: float | None = None
    gt: float | None = None
    le: float | None = None
    lt: float | None = None

def _converter(unit: str):
    def convert(value: Any) -> float:
        if isinstance(value, bool):
            raise ValueError(f"expected a number in {unit or 'plain numbers'}, got true/false")
        if isinstance(value, str) or isinstance(value, (int, float)):
            try:
                return to_si(value, unit)
            except UnitError as exc:
                raise ValueError(str(exc)) from None
        raise ValueError(f"expected a number in {unit} or a quantity string such as '12 {unit}'")

    return convert


def _bounds(ge=None, gt=None, le=None, lt=None, unit: str = ""):
    def check(value: float) -> float:
        if ge is not None and value < ge:
            raise ValueError(f"must be at least {_show(ge, unit)}")
        if gt is not None and value <= gt:
            raise ValueError(f"must be greater than {_show(gt, unit)}")
        if le is not None and value > le:
            raise ValueError(f"must be at most {_show(le, unit)}")
        if lt is not None and value >= lt:
            raise ValueError(f"must be less than {_show(lt, unit)}")
        return value

    return check


def _show(si_value: float, unit: str) -> str:
    from tco.units import from_si

    if not unit:
        return f"{fm.plain(si_value)}"
    return f"{fm.plain(from_si(si_value, unit))} {unit}"


def Qty(unit: str, *, ge=None, gt=None, le=None, lt=None):
    """An annotated float type: parsed from ``unit`` (or a unit string) to SI, then bounded.

    Bounds are given in ``unit`` (the documented default unit), like the defaults.
    """
    conv = _converter(unit)
    si = lambda b: None if b is None else to_si(b, unit)  # noqa: E731
    return Annotated[
        float,
        BeforeValidator(conv),
        AfterValidator(_bounds(si(ge), si(gt), si(le), si(lt), unit)),
        Bounds(ge, gt, le, lt),
    ]


def qfield(default: Any, unit: str, description: str, source: str | None = None, *,
           usual: tuple[float | None, float | None] | str | None = None,
           usual_source: str | None = None,
           bounds: tuple[float, float] | None = None,
           text_limit: int | None = None, multiline: bool = False, **kw):
    """A documented field: ``description [unit]``, its default and the default's source.

    ``default`` is written in ``unit`` and converted to SI when the model validates.

    Parameters
    ----------
    usual : (low, high) or str, optional
        The usual range in ``unit`` (either end may be None); a value outside is accepted
        and reported as a warning (:func:`unusual_values`). A string ``"none: why"`` says
        why the field has none.
    usual_source : str, optional
        Where the usual range comes from ("common practice", "from memory", a publication).
    bounds : (low, high), optional
        Hard limits in ``unit`` that a validator of the field enforces (a rate's band, a
        calendar year, a budget): written here so that they are documented beside the field.
    text_limit : int, optional
        Longest accepted text [characters] (default :data:`TEXT_LIMIT`).
    multiline : bool
        Text may hold line breaks.
    """
    extra: dict[str, Any] = {"unit": unit, "source": source or ASSUMPTION}
    if isinstance(usual, str):
        extra["usual"] = usual
    elif usual is not None:
        extra["usual"] = list(usual)
    if usual_source is not None:
        extra["usual_source"] = usual_source
    if bounds is not None:
        extra["bounds"] = list(bounds)
    if text_limit is not None:
        extra["text_limit"] = text_limit
    if multiline:
        extra["multiline"] = True
    desc = f"{description} [{unit or '-'}]"
    if default is ...:
        return Field(..., description=desc, json_schema_extra={**extra, "source": "user"},
                     **kw)
    return Field(default, description=desc, json_schema_extra=extra, **kw)


def mfield(default: Any, unit: str, description: str, source: str | None = None, **kw):
    """A documented plain field (money, counts, choices): same metadata, no unit parsing."""
    return qfield(default, unit, description, source, **kw)


def _is_money(unit: str) -> bool:
    return unit.startswith("currency") or unit.startswith("1/")


def _plain_value(value: float, unit: str) -> float:
    """An SI value back in the field's declared unit (money is never converted)."""
    if not unit or unit.startswith("currency"):
        return value
    from tco.units import from_si

    return float(from_si(value, unit))


def _check_value(value: Any, extra: dict) -> Any:
    """The rules every field gets (see the module notes); returns the cleaned value."""
    if isinstance(value, bool) or value is None:
        return value
    unit = extra.get("unit", "") or ""
    if isinstance(value, float):
        if not math.isfinite(value):
            raise ValueError("must be a finite number")
        if _is_money(unit) and abs(_plain_value(value, unit)) > MONEY_CEILING:
            raise ValueError(f"{fm.plain(_plain_value(value, unit))} is above the ceiling of "
                             f"{fm.plain(MONEY_CEILING)} for any amount or price in the scenario's "
                             "currency")
        return value
    if isinstance(value, int):
        if abs(value) > INT_CEILING:
            raise ValueError(f"must be at most {fm.plain(INT_CEILING)}")
        return value
    if isinstance(value, str):
        limit = extra.get("text_limit", TEXT_LIMIT)
        if len(value) > limit:
            raise ValueError(f"is {fm.count(len(value))} characters long; the limit is "
                             f"{fm.count(limit)}")
        return clean_text(value, multiline=bool(extra.get("multiline")))
    if isinstance(value, list):
        return [_check_value(v, extra) for v in value]
    if isinstance(value, tuple):
        return tuple(_check_value(v, extra) for v in value)
    if isinstance(value, dict):
        return {_check_value(k, {}): _check_value(v, extra) for k, v in value.items()}
    return value


class Section(BaseModel):
    """Base of every scenario section: unknown fields are errors; defaults are validated.

    Every field also gets the rules of :func:`_check_value`: finite numbers, money below
    :data:`MONEY_CEILING`, bounded whole numbers, bounded text without control characters.
    """

    model_config = ConfigDict(extra="forbid", validate_default=True, frozen=False)

    @field_validator("*", mode="after")
    @classmethod
    def _plausible(cls, value: Any, info: ValidationInfo) -> Any:
        field = cls.model_fields.get(info.field_name)
        extra = field.json_schema_extra if field is not None and \
            isinstance(field.json_schema_extra, dict) else {}
        return _check_value(value, extra)


def number_text(v: float) -> str:
    """A number for a warning, as every message writes it (:func:`tco.report.formatting.plain`:
    thousands separated, the shortest decimal, never e-notation)."""
    return fm.plain(v)


def _unit_text(unit: str) -> str:
    """A field's unit after a number: ' km', ' per kWh' for a price, '' for money."""
    if not unit or unit.startswith("currency"):
        return ""
    if unit.startswith("1/"):
        return f" per {unit[2:]}"
    return f" {unit}"


def _show_usual(low, high, unit: str) -> str:
    u = _unit_text(unit)
    if low is not None and high is not None:
        return f"{number_text(low)} to {number_text(high)}{u}"
    return (f"at least {number_text(low)}{u}" if low is not None
            else f"at most {number_text(high)}{u}")


def unusual_values(model: BaseModel, prefix: str = "", currency: str | None = None
                   ) -> list[str]:
    """Warnings for values outside their field's usual range (``qfield(usual=...)``).

    Such values are possible, so they are not refused; the report lists them so that a
    slip (a rate written as 8 instead of 0.08, a price in the wrong unit) is seen.

    Parameters
    ----------
    currency : str, optional
        The ISO 4217 code money is written in; default: the model's ``study.currency``, if
        any. Money and price fields are checked only in :data:`DOLLAR_LIKE` currencies.

    Returns
    -------
    list of str
        One plain sentence per unusual value, naming the field.
    """
    if currency is None:
        currency = getattr(getattr(model, "study", None), "currency", None)
    out: list[str] = []
    for name, info in type(model).model_fields.items():
        value = getattr(model, name)
        path = f"{prefix}{name}"
        extra = info.json_schema_extra if isinstance(info.json_schema_extra, dict) else {}
        if isinstance(value, BaseModel):
            out += unusual_values(value, path + ".", currency)
            continue
        if isinstance(value, list) and value and all(isinstance(v, BaseModel) for v in value):
            for i, item in enumerate(value):
                out += unusual_values(item, f"{path}[{i}].", currency)
            continue
        usual = extra.get("usual")
        if not usual or isinstance(usual, str) or name not in model.model_fields_set:
            continue  # only values the user gave: defaults of unused options may be 0
        unit = extra.get("unit", "") or ""
        if _is_money(unit) and currency not in DOLLAR_LIKE:
            continue
        if not _is_quantity(info):
            unit = "currency" if _is_money(unit) else ""  # held as written: no conversion
        items = value if isinstance(value, list) else \
            list(value.values()) if isinstance(value, dict) else [value]
        for k, item in enumerate(items):
            if isinstance(item, bool) or not isinstance(item, (int, float)):
                continue
            if item == 0 and _is_money(extra.get("unit", "") or ""):
                continue  # an amount or price of 0 leaves the cost out: never unusual
            shown = _plain_value(float(item), unit)
            low, high = usual
            if (low is not None and shown < low) or (high is not None and shown > high):
                where = path if items is not value else f"{path}[{k}]"
                if isinstance(value, dict):
                    where = f"{path}[{list(value)[k]}]"
                shown_unit = extra.get("unit", "") or ""
                out.append(f"{where} = {number_text(shown)}{_unit_text(shown_unit)} is outside the "
                           f"usual range ({_show_usual(low, high, shown_unit)}); check that "
                           "it is meant")
                break
    return out


def _is_quantity(info) -> bool:
    """The field is read with :func:`Qty` (held in SI), not as written."""
    return any(isinstance(m, Bounds) for m in info.metadata) or bool(_limits_in(info.annotation))


def _limits_in(annotation: Any) -> list[Bounds]:
    """Every :class:`Bounds` marker in a type, through Optional, list and dict."""
    import typing

    found: list[Bounds] = []
    for meta in getattr(annotation, "__metadata__", ()):
        if isinstance(meta, Bounds):
            found.append(meta)
    for arg in typing.get_args(annotation):
        if arg is not annotation:
            found += _limits_in(arg)
    return found


def field_limits(info) -> tuple[float | None, float | None]:
    """The hard (low, high) limits of a field in its declared unit, or None where open.

    Read from the field's :func:`Qty` type, its ``ge``/``gt``/``le``/``lt``, its declared
    ``bounds`` and, for money and prices, :data:`MONEY_CEILING` (the rule every field gets).
    """
    lows: list[float] = []
    highs: list[float] = []
    for b in _limits_in(info.annotation):
        lows += [v for v in (b.ge, b.gt) if v is not None]
        highs += [v for v in (b.le, b.lt) if v is not None]
    for m in info.metadata:
        if isinstance(m, Bounds):
            lows += [v for v in (m.ge, m.gt) if v is not None]
            highs += [v for v in (m.le, m.lt) if v is not None]
        # pydantic keeps Field(ge=…) etc. as annotated-types markers with one attribute
        for attr, side in (("ge", lows), ("gt", lows), ("le", highs), ("lt", highs)):
            if not isinstance(m, Bounds) and isinstance(getattr(m, attr, None), (int, float)):
                side.append(getattr(m, attr))
    extra = info.json_schema_extra if isinstance(info.json_schema_extra, dict) else {}
    if "bounds" in extra:
        lows.append(extra["bounds"][0])
        highs.append(extra["bounds"][1])
    if _is_money(extra.get("unit", "") or ""):
        highs.append(MONEY_CEILING)
    return (max(lows) if lows else None, min(highs) if highs else None)


def field_sources(model: BaseModel, prefix: str = "") -> list[dict]:
    """Every input of a validated model as rows: path, value [SI], unit, source.

    The source is ``"user"`` for fields set in the scenario file, otherwise the default's
    citation. Nested sections and lists of sections are walked.
    """
    rows: list[dict] = []
    for name, info in type(model).model_fields.items():
        value = getattr(model, name)
        path = f"{prefix}{name}"
        extra = info.json_schema_extra if isinstance(info.json_schema_extra, dict) else {}
        if isinstance(value, BaseModel):
            rows += field_sources(value, path + ".")
        elif isinstance(value, list) and value and all(isinstance(v, BaseModel) for v in value):
            for i, item in enumerate(value):
                rows += field_sources(item, f"{path}[{i}].")
        else:
            user = name in model.model_fields_set
            rows.append(
                {
                    "field": path,
                    "value": value,
                    "unit": extra.get("unit", ""),
                    "description": info.description or "",
                    "source": "user" if user else extra.get("source", ASSUMPTION),
                }
            )
    return rows
