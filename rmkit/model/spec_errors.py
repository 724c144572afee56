"""One-line messages for pydantic validation errors of rmkit's TOML files (field path, rule, value)."""

from __future__ import annotations

from typing import Any

from pydantic import BaseModel, ValidationError

_FIELD_HELP = {
    "int_type": "must be a whole number",
    "float_type": "must be a number",
    "string_type": "must be a string",
    "list_type": "must be a list",
    "dict_type": "must be a table",
    "missing": "is required but missing",
    "bool_type": "must be true or false",
}


def location(loc: tuple[Any, ...]) -> str:
    """``("demand", "curve", 0, "shape")`` -> ``demand.curve[0].shape``."""
    out = ""
    for part in loc:
        if isinstance(part, int):
            out += f"[{part}]"
        else:
            out += ("." if out else "") + str(part)
    return out


def pydantic_message(err: ValidationError, root: type[BaseModel],
                     prefix: tuple[Any, ...] = ()) -> str:
    """The first error of ``err`` as ``field.path: rule, got value`` (or the valid fields)."""
    first = err.errors()[0]
    loc = tuple(p for p in first["loc"] if not (isinstance(p, str) and p.startswith("function")))
    kind = first["type"]
    if kind == "extra_forbidden":
        parent, name = loc[:-1], loc[-1]
        model = _model_at(root, parent)
        valid = ", ".join(model.model_fields) if model else "see the README"
        where = location(prefix + parent) or "top level"
        return f"{where}: unknown field {name!r}; valid fields: {valid}"
    ctx = first.get("ctx") or {}
    bounds = {"greater_than_equal": f"must be >= {ctx.get('ge')}",
              "less_than_equal": f"must be <= {ctx.get('le')}",
              "greater_than": f"must be > {ctx.get('gt')}",
              "less_than": f"must be < {ctx.get('lt')}"}
    rule = bounds.get(kind) or _FIELD_HELP.get(kind, first["msg"])
    got = first.get("input")
    where = location(prefix + loc)
    return f"{where}: {rule}, got {got!r}" if kind != "missing" else f"{where}: {rule}"


def _model_at(root: type[BaseModel], loc: tuple[Any, ...]) -> type[BaseModel] | None:
    model: type[BaseModel] | None = root
    for part in loc:
        if isinstance(part, int) or model is None:
            continue
        found = model.model_fields.get(str(part))
        if found is None:
            return None
        model = _inner_model(found.annotation)
    return model


def _inner_model(ann: Any) -> type[BaseModel] | None:
    if isinstance(ann, type) and issubclass(ann, BaseModel):
        return ann
    for arg in getattr(ann, "__args__", ()) or ():
        found = _inner_model(arg)
        if found is not None:
            return found
    return None


def validated(model: type[BaseModel], table: dict[str, Any], prefix: tuple[Any, ...]) -> Any:
    """``model`` read from a TOML table, or :class:`rmkit.errors.InputError` with the one-line
    message of :func:`pydantic_message`."""
    from rmkit.errors import InputError

    try:
        return model.model_validate(table)
    except ValidationError as err:
        raise InputError(pydantic_message(err, model, prefix=prefix)) from None
