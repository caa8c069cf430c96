"""Building blocks of the scenario schema: quantity fields with units and cited defaults.

A quantity field accepts a plain number in its documented default unit or a string with
units; after validation it holds a float in SI. Every field records its default unit and
where its default comes from, so the report can list every assumption with its source.

Bounds live beside each field, in its declared unit:

* **hard bounds** — ``Qty(unit, ge=, gt=, le=, lt=)`` for quantities, ``ge=`` / ``le=`` of
  ``mfield`` for counts: a value outside is refused with one line;
* **usual range** — ``qfield(..., usual=(low, high))`` (either may be ``None``): a value
  outside is accepted and named in the report's warnings (:func:`unusual_values`);
* **rules every field gets** (:meth:`Section._plausible`, so a new field needs nothing
  extra): numbers are finite; money (unit ``currency…``) and prices (unit ``1/…``) are at
  most :data:`MONEY_CEILING` in the scenario's currency; whole numbers are at most
  :data:`INT_CEILING`; text has its control characters replaced by U+FFFD and is at most
  :data:`TEXT_LIMIT` characters, or ``qfield(..., text_limit=N, multiline=True)``.
"""
from __future__ import annotations

import math
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
        return f"{si_value:g}"
    return f"{from_si(si_value, unit):g} {unit}"


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
    ]


def qfield(default: Any, unit: str, description: str, source: str | None = None, *,
           usual: tuple[float | None, float | None] | None = None,
           text_limit: int | None = None, multiline: bool = False, **kw):
    """A documented field: ``description [unit]``, its default and the default's source.

    ``default`` is written in ``unit`` and converted to SI when the model validates.

    Parameters
    ----------
    usual : (low, high), optional
        The usual range in ``unit`` (either end may be None); a value outside is accepted
        and reported as a warning (:func:`unusual_values`).
    text_limit : int, optional
        Longest accepted text [characters] (default :data:`TEXT_LIMIT`).
    multiline : bool
        Text may hold line breaks.
    """
    extra: dict[str, Any] = {"unit": unit, "source": source or ASSUMPTION}
    if usual is not None:
        extra["usual"] = list(usual)
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
            raise ValueError(f"{_plain_value(value, unit):.3g} is above the ceiling of "
                             f"{MONEY_CEILING:.0e} for any amount or price in the scenario's "
                             "currency")
        return value
    if isinstance(value, int):
        if abs(value) > INT_CEILING:
            raise ValueError(f"must be at most {INT_CEILING:.3g}")
        return value
    if isinstance(value, str):
        limit = extra.get("text_limit", TEXT_LIMIT)
        if len(value) > limit:
            raise ValueError(f"is {len(value):,} characters long; the limit is {limit:,}")
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


def _show_usual(low, high, unit: str) -> str:
    u = f" {unit}" if unit and not unit.startswith("currency") else ""
    if low is not None and high is not None:
        return f"{low:g} to {high:g}{u}"
    return f"at least {low:g}{u}" if low is not None else f"at most {high:g}{u}"


def unusual_values(model: BaseModel, prefix: str = "") -> list[str]:
    """Warnings for values outside their field's usual range (``qfield(usual=...)``).

    Such values are possible, so they are not refused; the report lists them so that a
    slip (a rate written as 8 instead of 0.08, a price in the wrong unit) is seen.

    Returns
    -------
    list of str
        One plain sentence per unusual value, naming the field.
    """
    out: list[str] = []
    for name, info in type(model).model_fields.items():
        value = getattr(model, name)
        path = f"{prefix}{name}"
        extra = info.json_schema_extra if isinstance(info.json_schema_extra, dict) else {}
        if isinstance(value, BaseModel):
            out += unusual_values(value, path + ".")
            continue
        if isinstance(value, list) and value and all(isinstance(v, BaseModel) for v in value):
            for i, item in enumerate(value):
                out += unusual_values(item, f"{path}[{i}].")
            continue
        usual = extra.get("usual")
        if not usual or isinstance(value, bool) or not isinstance(value, (int, float)):
            continue
        unit = extra.get("unit", "") or ""
        shown = _plain_value(float(value), unit)
        low, high = usual
        if (low is not None and shown < low) or (high is not None and shown > high):
            u = f" {unit}" if unit and not unit.startswith("currency") else ""
            out.append(f"{path} = {shown:g}{u} is outside the usual range "
                       f"({_show_usual(low, high, unit)}); check that it is meant")
    return out


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
