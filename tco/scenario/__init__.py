"""The validated scenario: loading a hand-written TOML file into SI quantities.

A scenario file has these sections (each documented field by field in its model):

``[study]`` title, currency, unit system · ``[ambient]`` conditions · ``[route]`` with
``[[route.legs]]`` and their ``[[route.legs.segments]]`` or trace files · ``[[trucks]]``
with ``[trucks.body]``, ``[trucks.diesel]`` or ``[trucks.electric]`` and ``[trucks.costs]``
· ``[finance]`` · ``[prices]`` · ``[depot]`` · ``[emissions]`` · ``[uncertainty]``.

Every problem is raised as :class:`tco.errors.InputError` naming the file and the field.
"""
from __future__ import annotations

import difflib
import hashlib
import json
import tomllib
from pathlib import Path
from typing import Literal

from pydantic import Field, ValidationError, model_validator

from tco.errors import InputError
from tco.report import formatting as fm
from tco.scenario.base import Section, field_sources, mfield
from tco.scenario.costs import Depot, Finance, Prices, TruckCosts
from tco.scenario.emissions import EmissionsSettings
from tco.scenario.files import MAX_SCENARIO_BYTES, input_file
from tco.scenario.route import Ambient, Leg, Route, Segment, Study
from tco.scenario.uncertainty import UncertaintySettings
from tco.scenario.vehicle import Body, Diesel, Electric, EnRoute

__all__ = [
    "Ambient", "Body", "Depot", "Diesel", "Electric", "EmissionsSettings", "EnRoute",
    "Finance", "Leg", "LoadedScenario", "Prices", "Route", "Scenario", "Segment", "Study",
    "Truck", "TruckCosts", "UncertaintySettings", "field_sources", "load_scenario",
    "parse_scenario",
]


class Truck(Section):
    """One candidate truck."""

    name: str = mfield(..., "", "Name of the truck, unique in the scenario (at most 80 "
                       "characters)", text_limit=80)
    powertrain: Literal["diesel", "electric"] = mfield(..., "", "diesel or electric")
    body: Body = Field(..., description="Masses, aerodynamics, tyres")
    diesel: Diesel | None = Field(None, description="Diesel powertrain (diesel trucks)")
    electric: Electric | None = Field(None, description="Electric powertrain (electric trucks)")
    costs: TruckCosts = Field(default_factory=TruckCosts, description="Costs of this truck")

    @model_validator(mode="after")
    def _powertrain_block(self):
        if self.powertrain == "diesel" and self.diesel is None:
            raise ValueError("a diesel truck needs a [trucks.diesel] section")
        if self.powertrain == "electric" and self.electric is None:
            raise ValueError("an electric truck needs a [trucks.electric] section")
        if self.powertrain == "diesel" and self.electric is not None:
            raise ValueError("a diesel truck cannot have an [trucks.electric] section")
        if self.powertrain == "electric" and self.diesel is not None:
            raise ValueError("an electric truck cannot have a [trucks.diesel] section")
        return self


class Scenario(Section):
    """A whole study: the job, the candidate trucks, prices, finance, emissions settings."""

    study: Study
    ambient: Ambient = Field(default_factory=Ambient)
    route: Route
    trucks: list[Truck] = Field(..., min_length=2, description="Candidate trucks (two or more)")
    finance: Finance = Field(default_factory=Finance)
    prices: Prices = Field(default_factory=Prices)
    depot: Depot = Field(default_factory=Depot)
    emissions: EmissionsSettings = Field(default_factory=EmissionsSettings)
    uncertainty: UncertaintySettings = Field(default_factory=UncertaintySettings)

    @model_validator(mode="after")
    def _unset_escalations_follow_inflation(self):
        """In nominal money an escalation left unset is general inflation (0 % real); in
        real money it stays 0 (already above inflation). Filled values keep their default
        source (which says so) and are listed by :meth:`unset_escalations`."""
        if self.finance.money_basis != "nominal":
            return self
        rate = self.finance.inflation
        sections = [(self.finance, ("driver_cost_escalation",)),
                    (self.prices.escalation, None)]
        sections += [(t.costs.escalation, None) for t in self.trucks]
        for sec, names in sections:
            for name in names or type(sec).model_fields:
                if name not in sec.model_fields_set:
                    sec.__dict__[name] = rate  # a default, not the user's: fields_set kept
        return self

    def unset_escalations(self) -> list[str]:
        """Escalation fields left unset, which follow inflation in nominal money. [-]"""
        if self.finance.money_basis != "nominal":
            return []
        out = [] if "driver_cost_escalation" in self.finance.model_fields_set \
            else ["finance.driver_cost_escalation"]
        secs = [("prices.escalation.", self.prices.escalation)]
        secs += [(f"trucks[{i}].costs.escalation.", t.costs.escalation)
                 for i, t in enumerate(self.trucks)]
        for prefix, sec in secs:
            out += [prefix + n for n in type(sec).model_fields if n not in sec.model_fields_set]
        return out

    @model_validator(mode="after")
    def _unique_names(self):
        names = [t.name for t in self.trucks]
        dupes = sorted({n for n in names if names.count(n) > 1})
        if dupes:
            raise ValueError(f"truck names must be unique; repeated: {', '.join(dupes)}")
        return self


class LoadedScenario:
    """A validated scenario with the file it came from.

    Attributes
    ----------
    scenario : Scenario
        The validated model (SI quantities).
    path : Path or None
        The scenario file (absolute); trace files are resolved relative to its folder.
    raw : dict
        The TOML as written (for the assumptions table and the fingerprint).
    fingerprint : str
        SHA-256 of the scenario file's bytes and every trace file it uses.
    inputs_fingerprint : str or None
        SHA-256 of the parsed inputs and the traces' contents (:func:`inputs_fingerprint`):
        the same for a TOML file and the workbook made from it.
    shown : Path or None
        The scenario file as the user gave it: errors name files in this style.
    """

    def __init__(self, scenario: Scenario, path: Path | None, raw: dict, fingerprint: str,
                 inputs_fingerprint: str | None = None, shown: Path | None = None):
        self.scenario = scenario
        self.path = path
        self.raw = raw
        self.fingerprint = fingerprint
        self.inputs_fingerprint = inputs_fingerprint
        self.shown = Path(shown) if shown is not None else path

    @property
    def base_dir(self) -> Path:
        return self.path.parent if self.path else Path.cwd()

    @property
    def slug(self) -> str:
        if self.scenario.study.slug:
            return self.scenario.study.slug
        stem = self.path.stem if self.path else "scenario"
        return "".join(c if c.isalnum() or c in "._-" else "-" for c in stem).lstrip(".-") \
            or "scenario"

    def resolve(self, name: str) -> Path:
        """A trace file named in the scenario, in the user's path style.

        Confined to the scenario's folder (and ``--allow-folder`` folders), see
        :func:`tco.scenario.files.input_file`.
        """
        base = self.shown.parent if self.shown is not None else None
        return input_file(name, base, (".csv", ".gpx"), "trace file")


def _loc(loc: tuple) -> str:
    out = ""
    for part in loc:
        if isinstance(part, int):
            out += f"[{part}]"
        elif part in ("function-after", "function-before") or "[" in str(part):
            continue
        else:
            out += ("." if out else "") + str(part)
    return out


def _field_names_at(loc: tuple) -> list[str]:
    """Names of the fields of the section at ``loc`` (list indices skipped)."""
    import typing

    from pydantic import BaseModel

    cls = Scenario
    for part in loc:
        if isinstance(part, int):
            continue
        field = cls.model_fields.get(str(part))
        if field is None:
            return []
        found = None
        stack = [field.annotation]
        while stack:
            t = stack.pop()
            if isinstance(t, type) and issubclass(t, BaseModel):
                found = t
                break
            stack.extend(typing.get_args(t))
        if found is None:
            return []
        cls = found
    return list(cls.model_fields)


def _has_currency_sign(value) -> bool:
    return isinstance(value, str) and any(sign in value for sign in "$€£¥₹")


def parse_scenario(data: dict, path: Path | None = None) -> Scenario:
    """Validate a scenario given as a dict (e.g. parsed TOML); errors as InputError."""
    try:
        context = {"base_dir": path.parent} if path is not None else None
        return Scenario.model_validate(data, context=context)
    except ValidationError as exc:
        errors = exc.errors()
        # A misspelt field shows up as "unknown" plus "missing": report the unknown one.
        errors.sort(key=lambda e: e.get("type") != "extra_forbidden")
        err = errors[0]
        where = _loc(err["loc"]) or None
        kind = err.get("type", "")
        msg = err.get("msg", "invalid value")
        msg = msg.removeprefix("Value error, ")
        if kind == "extra_forbidden":
            msg = "unknown field"
            parent = err["loc"][:-1]
            missing = [str(e["loc"][-1]) for e in errors
                       if e.get("type") == "missing" and e["loc"][:-1] == parent]
            close = difflib.get_close_matches(str(err["loc"][-1]), missing, n=1)
            if not close:  # a misspelt optional field: the known names at that place
                close = difflib.get_close_matches(str(err["loc"][-1]),
                                                  _field_names_at(parent), n=1, cutoff=0.6)
            msg += f" (did you mean '{close[0]}'?)" if close else \
                " (check its spelling against `tco init`)"
        elif _has_currency_sign(err.get("input")):
            msg = (f"'{err['input']}' has a currency sign: write amounts as plain numbers "
                   "in the scenario's currency (study.currency), e.g. 120000")
        elif kind == "missing":
            msg = "required field is missing"
        raise InputError(msg, file=path, where=where) from None


def inputs_fingerprint(scenario: Scenario, traces: list[bytes]) -> str:
    """SHA-256 of a scenario's parsed inputs and its traces' contents.

    Unlike the file fingerprint it does not depend on how the inputs were written (TOML
    or workbook, ``36 t`` or ``36000 kg``, comments, order): it hashes the validated model
    as canonical JSON (SI values, sorted keys) and then each trace file's bytes.

    Parameters
    ----------
    scenario : Scenario
    traces : list of bytes
        The trace files the legs name, in leg order.
    """
    blob = json.dumps(scenario.model_dump(mode="json"), sort_keys=True,
                      separators=(",", ":"), ensure_ascii=False).encode("utf-8")
    h = hashlib.sha256(b"tco-inputs-1\n" + blob)
    for t in traces:
        h.update(hashlib.sha256(t).digest())
    return h.hexdigest()


def load_scenario(path: str | Path) -> LoadedScenario:
    """Read and validate a scenario: a TOML file, or a workbook's field table
    (:mod:`tco.scenario.xlsx`).

    UTF-8 with or without a byte-order mark; at most
    :data:`tco.scenario.files.MAX_SCENARIO_BYTES`; trace files must lie in the scenario's
    folder (or an allowed one) and are checked to exist.

    Parameters
    ----------
    path : str or Path
        The scenario file.

    Returns
    -------
    LoadedScenario

    Raises
    ------
    InputError
        When the file is missing, is not valid TOML, or a field is wrong.
    """
    path = Path(path)
    if path.is_dir():
        raise InputError("is a folder, not a scenario file", file=path)
    from tco.scenario.xlsx import is_workbook, load_workbook_scenario

    if is_workbook(path):
        return load_workbook_scenario(path)
    if not path.is_file():
        raise InputError("file not found", file=path)
    size = path.stat().st_size
    if size > MAX_SCENARIO_BYTES:
        raise InputError(f"is {fm.data_size(size)}; a scenario file may be at most "
                         f"{fm.data_size(MAX_SCENARIO_BYTES)}", file=path)
    blob = path.read_bytes()
    try:
        raw = tomllib.loads(blob.decode("utf-8-sig"))  # a byte-order mark is allowed
    except UnicodeDecodeError:
        raise InputError("not a UTF-8 text file", file=path) from None
    except tomllib.TOMLDecodeError as exc:
        raise InputError(f"not valid TOML: {exc}", file=path) from None
    except RecursionError:
        raise InputError("not valid TOML: tables or arrays nested too deeply", file=path) \
            from None
    try:
        scenario = parse_scenario(raw, path)
    except RecursionError:
        raise InputError("values nested too deeply", file=path) from None
    h = hashlib.sha256(blob)
    traces = []
    for i, leg in enumerate(scenario.route.legs):
        if leg.file:
            try:
                trace = input_file(leg.file, path.parent, (".csv", ".gpx"), "trace file")
            except InputError as exc:
                raise exc.located(file=path, where=f"route.legs[{i}].file") from None
            traces.append(trace.read_bytes())
            h.update(traces[-1])
    return LoadedScenario(scenario, path.resolve(), raw, h.hexdigest(),
                          inputs_fingerprint(scenario, traces), shown=path)
