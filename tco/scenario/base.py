"""Building blocks of the scenario schema: quantity fields with units and cited defaults.

A quantity field accepts a plain number in its documented default unit or a string with
units; after validation it holds a float in SI. Every field records its default unit and
where its default comes from, so the report can list every assumption with its source.
"""
from __future__ import annotations

from typing import Annotated, Any

from pydantic import AfterValidator, BaseModel, BeforeValidator, ConfigDict, Field

from tco.units import UnitError, to_si

#: Marker for defaults that are the tool's own assumptions (no published source).
ASSUMPTION = "assumption (tool default; replace with your own figure)"


def _converter(unit: str):
    def convert(value: Any) -> float:
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


def qfield(default: Any, unit: str, description: str, source: str | None = None, **kw):
    """A documented field: ``description [unit]``, its default and the default's source.

    ``default`` is written in ``unit`` and converted to SI when the model validates.
    """
    extra = {"unit": unit, "source": source or ASSUMPTION}
    desc = f"{description} [{unit or '-'}]"
    if default is ...:
        return Field(..., description=desc, json_schema_extra={"unit": unit, "source": "user"})
    return Field(default, description=desc, json_schema_extra=extra, **kw)


def mfield(default: Any, unit: str, description: str, source: str | None = None, **kw):
    """A documented plain field (money, counts, choices): same metadata, no unit parsing."""
    return qfield(default, unit, description, source, **kw)


class Section(BaseModel):
    """Base of every scenario section: unknown fields are errors; defaults are validated."""

    model_config = ConfigDict(extra="forbid", validate_default=True, frozen=False)


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
