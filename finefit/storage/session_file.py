"""The session file: a TOML document of our own schema (see DEVELOPERS.md).

Reading validates every field and raises :class:`FinefitError` naming the table,
the entry and the key; writing keeps a fixed key order so version-control diffs
stay small.
"""

from __future__ import annotations

import math
import tomllib
from dataclasses import dataclass, field
from typing import Any

import tomli_w

from finefit.errors import FinefitError, quote
from finefit.fitting.settings import FitOptions, ObservedLevel, ParameterSetting
from finefit.notation.jvalues import format_j, parse_j
from finefit.storage.level_sets import LevelSet, dump_level_sets, parse_level_sets

FORMAT = "finefit-session/1"

TOP_KEYS = ("format", "title", "note", "ion", "model", "fit", "parameters", "level",
            "parameter_set", "level_set")
ION_KEYS = ("Z", "charge", "ionization_limit", "name")
MODEL_KEYS = ("configurations",)
FIT_KEYS = ("weighting", "default_uncertainty", "max_iterations", "tolerance",
            "scale_covariance", "correlation_threshold", "assignment", "follow_eigenvectors")
PARAM_KEYS = ("value", "vary", "min", "max", "link", "ab_initio")
LEVEL_KEYS = ("id", "energy", "uncertainty", "J", "parity", "configuration", "label",
              "include", "g", "note", "state")
SET_KEYS = ("name", "created", "converged", "sigma", "n_levels", "n_free", "included",
            "note", "values", "errors")


@dataclass
class Ion:
    Z: int
    charge: int = 0
    ionization_limit: float | None = None
    name: str = ""


@dataclass
class ParameterSet:
    """A saved fit: values, errors and statistics, with the levels it used."""

    name: str
    created: str
    values: dict[str, float]
    errors: dict[str, float]
    sigma: float | None
    n_levels: int
    n_free: int
    included: list[str]
    converged: bool = True
    note: str = ""


@dataclass
class SessionData:
    ion: Ion
    configurations: list[str]
    parameters: dict[str, ParameterSetting]
    levels: list[ObservedLevel]
    options: FitOptions
    parameter_sets: list[ParameterSet] = field(default_factory=list)
    title: str = ""
    note: str = ""
    level_sets: list[LevelSet] = field(default_factory=list)  # optimised levels applied


# ----------------------------------------------------------------------------- reading
def _where(ctx: str, key: str) -> str:
    return f"{ctx}, key '{key}'" if ctx else f"key '{key}'"


def _unknown(table: dict, allowed: tuple[str, ...], ctx: str, source: str) -> None:
    for k in table:
        if k not in allowed:
            raise FinefitError(
                f"{source}: unknown key {quote(k)} in {ctx}; allowed keys: {', '.join(allowed)}",
                k,
            )


def _num(table: dict, key: str, ctx: str, source: str, required: bool = False,
         positive: bool = False) -> float | None:
    if key not in table:
        if required:
            raise FinefitError(f"{source}: {ctx} needs '{key}'", key)
        return None
    v = table[key]
    if isinstance(v, bool) or not isinstance(v, int | float):
        raise FinefitError(
            f"{source}: {_where(ctx, key)} must be a number, got {quote(v)}", key
        )
    if not math.isfinite(v):
        raise FinefitError(f"{source}: {_where(ctx, key)} must be finite, got {quote(v)}", key)
    if positive and not v > 0:
        raise FinefitError(f"{source}: {_where(ctx, key)} must be positive, got {quote(v)}", key)
    return float(v)


def _int(table: dict, key: str, ctx: str, source: str, required: bool = False) -> int | None:
    if key not in table:
        if required:
            raise FinefitError(f"{source}: {ctx} needs '{key}'", key)
        return None
    v = table[key]
    if isinstance(v, bool) or not isinstance(v, int):
        raise FinefitError(
            f"{source}: {_where(ctx, key)} must be a whole number, got {quote(v)}", key)
    return int(v)


def _str(table: dict, key: str, ctx: str, source: str, required: bool = False) -> str | None:
    if key not in table:
        if required:
            raise FinefitError(f"{source}: {ctx} needs '{key}'", key)
        return None
    v = table[key]
    if not isinstance(v, str):
        raise FinefitError(f"{source}: {_where(ctx, key)} must be text, got {quote(v)}", key)
    return v


def _bool(table: dict, key: str, ctx: str, source: str, default: bool) -> bool:
    if key not in table:
        return default
    v = table[key]
    if not isinstance(v, bool):
        raise FinefitError(
            f"{source}: {_where(ctx, key)} must be true or false, got {quote(v)}", key)
    return v


def _table(doc: dict, key: str, source: str, required: bool = False) -> dict:
    if key not in doc:
        if required:
            raise FinefitError(f"{source}: the [{key}] table is missing", key)
        return {}
    v = doc[key]
    if not isinstance(v, dict):
        raise FinefitError(f"{source}: '{key}' must be a table", key)
    return v


def parse_session(text: str, source: str = "session") -> SessionData:
    """Read and validate a session document."""
    try:
        doc = tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        raise FinefitError(f"{source}: not valid TOML: {exc}", source) from None
    except RecursionError:
        raise FinefitError(f"{source}: not a session file: its tables or arrays are nested "
                           "too deeply", source) from None
    _unknown(doc, TOP_KEYS, "the top level", source)
    fmt = doc.get("format", FORMAT)
    if fmt != FORMAT:
        raise FinefitError(
            f"{source}: format {quote(fmt)} is not {FORMAT!r} (written by a newer finefit?)",
            "format"
        )
    ion_t = _table(doc, "ion", source, required=True)
    _unknown(ion_t, ION_KEYS, "[ion]", source)
    Z = _int(ion_t, "Z", "[ion]", source, required=True)
    if not 1 <= Z <= 118:
        raise FinefitError(f"{source}: [ion] Z = {Z} is not a nuclear charge (1..118)", "Z")
    charge = _int(ion_t, "charge", "[ion]", source) or 0
    if not 0 <= charge < Z:
        raise FinefitError(f"{source}: [ion] charge = {charge} must be 0 .. Z-1", "charge")
    ion = Ion(Z, charge, _num(ion_t, "ionization_limit", "[ion]", source, positive=True),
              _str(ion_t, "name", "[ion]", source) or "")
    model_t = _table(doc, "model", source, required=True)
    _unknown(model_t, MODEL_KEYS, "[model]", source)
    configs = model_t.get("configurations")
    if not isinstance(configs, list) or not configs or not all(isinstance(c, str) for c in configs):
        raise FinefitError(
            f"{source}: [model] configurations must be a list of texts such as ['3d6 4s', '3d7']",
            "configurations",
        )
    fit_t = _table(doc, "fit", source)
    _unknown(fit_t, FIT_KEYS, "[fit]", source)
    opts = FitOptions()
    for key in FIT_KEYS:
        if key not in fit_t:
            continue
        if key in ("weighting", "assignment"):
            setattr(opts, key, _str(fit_t, key, "[fit]", source))
        elif key in ("scale_covariance", "follow_eigenvectors"):
            setattr(opts, key, _bool(fit_t, key, "[fit]", source, getattr(opts, key)))
        elif key == "max_iterations":
            setattr(opts, key, _int(fit_t, key, "[fit]", source))
        else:
            setattr(opts, key, _num(fit_t, key, "[fit]", source))
    opts.check()
    params_t = _table(doc, "parameters", source)
    params: dict[str, ParameterSetting] = {}
    for name, entry in params_t.items():
        ctx = f"[parameters.{quote(name)}]"
        if isinstance(entry, int | float) and not isinstance(entry, bool):
            entry = {"value": entry}
        if not isinstance(entry, dict):
            raise FinefitError(f"{source}: {ctx} must be a table or a number", name)
        _unknown(entry, PARAM_KEYS, ctx, source)
        s = ParameterSetting(
            value=_num(entry, "value", ctx, source) or 0.0,
            vary=_bool(entry, "vary", ctx, source, False),
            min=_num(entry, "min", ctx, source),
            max=_num(entry, "max", ctx, source),
            link=_str(entry, "link", ctx, source) or None,
            ab_initio=_num(entry, "ab_initio", ctx, source),
        )
        try:
            s.check(name)
        except FinefitError as exc:
            raise FinefitError(f"{source}: {exc}", name) from None
        params[name] = s
    levels_t = doc.get("level", [])
    if not isinstance(levels_t, list):
        raise FinefitError(f"{source}: 'level' must be an array of tables [[level]]", "level")
    levels = []
    for i, entry in enumerate(levels_t, start=1):
        if not isinstance(entry, dict):
            raise FinefitError(f"{source}: level {i} must be a table", f"level {i}")
        lid = entry.get("id", f"L{i:03d}")
        ctx = f"level {i} (id {quote(lid)})"
        if not isinstance(lid, str) or not lid.strip():
            raise FinefitError(f"{source}: level {i}: 'id' must be non-empty text", f"level {i}")
        _unknown(entry, LEVEL_KEYS, ctx, source)
        if "J" not in entry:
            raise FinefitError(f"{source}: {ctx} needs 'J'", lid)
        try:
            J = parse_j(entry["J"], field=f"{ctx} J")
        except FinefitError as exc:
            raise FinefitError(f"{source}: {exc}", lid) from None
        parity = _str(entry, "parity", ctx, source, required=True)
        if parity not in ("even", "odd"):
            raise FinefitError(
                f"{source}: {ctx} parity must be 'even' or 'odd', got {quote(parity)}", lid)
        state = entry.get("state")
        if state is not None and (isinstance(state, bool) or not isinstance(state, int | str)):
            raise FinefitError(f"{source}: {ctx} state must be a whole number or a label", lid)
        levels.append(
            ObservedLevel(
                id=lid,
                energy=_num(entry, "energy", ctx, source, required=True),
                J=J,
                parity=parity,
                uncertainty=_num(entry, "uncertainty", ctx, source, positive=True),
                configuration=_str(entry, "configuration", ctx, source) or None,
                label=_str(entry, "label", ctx, source) or None,
                include=_bool(entry, "include", ctx, source, True),
                g=_num(entry, "g", ctx, source),
                note=_str(entry, "note", ctx, source) or "",
                state=state,
            )
        )
    sets_t = doc.get("parameter_set", [])
    if not isinstance(sets_t, list):
        raise FinefitError(f"{source}: 'parameter_set' must be an array of tables",
                           "parameter_set")
    sets = []
    for i, entry in enumerate(sets_t, start=1):
        ctx = f"parameter set {i}"
        if not isinstance(entry, dict):
            raise FinefitError(f"{source}: {ctx} must be a table", ctx)
        _unknown(entry, SET_KEYS, ctx, source)
        vals = entry.get("values", {})
        errs = entry.get("errors", {})
        for tname, t in (("values", vals), ("errors", errs)):
            if not isinstance(t, dict) or not all(
                isinstance(v, int | float) and not isinstance(v, bool) for v in t.values()
            ):
                raise FinefitError(f"{source}: {ctx} '{tname}' must map names to numbers", ctx)
        included = entry.get("included", [])
        if not isinstance(included, list) or not all(isinstance(x, str) for x in included):
            raise FinefitError(f"{source}: {ctx} 'included' must be a list of level ids", ctx)
        sets.append(
            ParameterSet(
                name=_str(entry, "name", ctx, source, required=True),
                created=_str(entry, "created", ctx, source) or "",
                values={k: float(v) for k, v in vals.items()},
                errors={k: float(v) for k, v in errs.items()},
                sigma=_num(entry, "sigma", ctx, source),
                n_levels=_int(entry, "n_levels", ctx, source) or 0,
                n_free=_int(entry, "n_free", ctx, source) or 0,
                included=list(included),
                converged=_bool(entry, "converged", ctx, source, True),
                note=_str(entry, "note", ctx, source) or "",
            )
        )
    return SessionData(
        ion=ion, configurations=list(configs), parameters=params, levels=levels, options=opts,
        parameter_sets=sets, title=_str(doc, "title", "", source) or "",
        note=_str(doc, "note", "", source) or "",
        level_sets=parse_level_sets(doc.get("level_set", []), source),
    )


# ----------------------------------------------------------------------------- writing
def _clean(d: dict[str, Any]) -> dict[str, Any]:
    return {k: v for k, v in d.items() if v is not None}


def dump_session(data: SessionData) -> str:
    """The session as TOML text, keys in a fixed order."""
    doc: dict[str, Any] = {"format": FORMAT}
    if data.title:
        doc["title"] = data.title
    if data.note:
        doc["note"] = data.note
    doc["ion"] = _clean({
        "Z": data.ion.Z, "charge": data.ion.charge,
        "ionization_limit": data.ion.ionization_limit, "name": data.ion.name or None,
    })
    doc["model"] = {"configurations": list(data.configurations)}
    o = data.options
    doc["fit"] = {
        "weighting": o.weighting, "default_uncertainty": o.default_uncertainty,
        "max_iterations": o.max_iterations, "tolerance": o.tolerance,
        "scale_covariance": o.scale_covariance,
        "correlation_threshold": o.correlation_threshold, "assignment": o.assignment,
        "follow_eigenvectors": o.follow_eigenvectors,
    }
    params = {}
    for name, s in data.parameters.items():
        params[name] = _clean({
            "value": float(s.value), "vary": bool(s.vary), "min": s.min, "max": s.max,
            "link": s.link, "ab_initio": s.ab_initio,
        })
    doc["parameters"] = params
    doc["level"] = [
        _clean({
            "id": lv.id, "energy": float(lv.energy), "uncertainty": lv.uncertainty,
            "J": format_j(lv.J), "parity": lv.parity, "configuration": lv.configuration,
            "label": lv.label, "include": bool(lv.include), "g": lv.g,
            "note": lv.note or None, "state": lv.state,
        })
        for lv in data.levels
    ]
    doc["parameter_set"] = [
        _clean({
            "name": ps.name, "created": ps.created, "converged": ps.converged,
            "sigma": ps.sigma, "n_levels": ps.n_levels, "n_free": ps.n_free,
            "included": list(ps.included), "note": ps.note or None,
            "values": dict(ps.values),
            "errors": {k: v for k, v in ps.errors.items() if math.isfinite(v)},
        })
        for ps in data.parameter_sets
    ]
    if not doc["level"]:
        del doc["level"]
    if not doc["parameter_set"]:
        del doc["parameter_set"]
    if data.level_sets:
        doc["level_set"] = dump_level_sets(data.level_sets)
    header = (
        "# finefit session file (TOML). Energies and parameters in cm^-1.\n"
        "# Edit freely; finefit validates every field when it reads the file.\n"
    )
    return header + tomli_w.dumps(doc)
