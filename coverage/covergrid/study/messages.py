"""Study-file error messages: every problem located by its dotted path, value and remedy.

Validation (pydantic) reports problems as locations and codes; this module turns them into
the one-line messages of covergrid (``constellation[0].walker.planes: must divide total =
24; allowed: 1, 2, 3, ...; got 5``). Cross-field checks raise :class:`Problems` with their
own located messages, which are passed through unchanged. Nothing here knows the study's
models: the root model is a parameter, so the field bounds in a message come from the same
declarations that validate it.
"""

from __future__ import annotations

import difflib
import re
import reprlib
import typing
from typing import Any

from pydantic import BaseModel, ValidationError

from covergrid.errors import StudyError

__all__ = [
    "Problems",
    "did_you_mean",
    "format_path",
    "reason_of",
    "show_value",
    "study_error_from",
]


class Problems(ValueError):
    """Several located problems found by a cross-field check (unpacked by the converter).

    Parameters
    ----------
    problems : list of (location, message, value)
        Location relative to the model that raised it (a tuple of keys and indices).
    """

    def __init__(self, problems: list[tuple[tuple, str, Any]]) -> None:
        self.problems = problems
        super().__init__("; ".join(f"{format_path(p)}: {m}" for p, m, _ in problems))


#: Longest word compared with the allowed names for a suggestion (a longer one is no typo).
_SUGGEST_CHARS = 64


def did_you_mean(word: Any, options) -> str:
    """`` (did you mean 'x'?)`` for the closest option, or an empty string.

    Only short text is compared: anything else (a list, a long string) gets no suggestion,
    so a huge value is never turned into text to look for one.
    """
    if not isinstance(word, str) or len(word) > _SUGGEST_CHARS:
        return ""
    close = difflib.get_close_matches(word, [str(o) for o in options], n=1, cutoff=0.6)
    return f" (did you mean {close[0]!r}?)" if close else ""


def reason_of(exc: BaseException | str) -> str:
    """The text of an exception without a trailing full stop."""
    text = str(exc).strip().rstrip(".")
    return text or type(exc).__name__


def format_path(loc) -> str:
    """Dotted path of a location: ``('constellation', 0, 'walker')`` -> ``constellation[0].walker``.
    """
    out = ""
    for part in loc:
        if isinstance(part, int):
            out += f"[{part}]"
        else:
            text = str(part) if isinstance(part, str) else show_value(part)
            if len(text) > _PATH_PART_CHARS:  # a huge unknown key is shown cut short
                text = text[: _PATH_PART_CHARS - 3] + "..."
            out += ("." if out else "") + text
    return out or "(top level)"


#: Longest key shown in a dotted path [characters].
_PATH_PART_CHARS = 60


#: Limits of the value shown in a message: a few items per level, a few levels, so that a
#: huge (or alias-expanded) value is never walked in full to be shown in 80 characters.
_SHOWN = reprlib.Repr()
_SHOWN.maxlevel, _SHOWN.maxlist, _SHOWN.maxtuple, _SHOWN.maxdict = 3, 4, 4, 4
_SHOWN.maxstring, _SHOWN.maxother, _SHOWN.maxlong = 60, 60, 40
_SHOWN_CHARS = 80


def show_value(value: Any) -> str:
    """A short text of a value for an error message (at most 80 characters).

    Built with :mod:`reprlib` limits, so its cost does not grow with the size of the value.
    """
    text = _SHOWN.repr(value)
    return text if len(text) <= _SHOWN_CHARS else text[: _SHOWN_CHARS - 3] + "..."


def _model_at(root: type[BaseModel], loc: tuple) -> type[BaseModel] | None:
    """The model class that validates the mapping found at ``loc`` (None if not a model)."""
    model: Any = root
    for part in loc:
        if isinstance(part, int):
            continue
        if not (isinstance(model, type) and issubclass(model, BaseModel)):
            return None
        field = model.model_fields.get(part)
        if field is None:
            return None
        model = _unwrap_model(field.annotation)
    return model if isinstance(model, type) and issubclass(model, BaseModel) else None


def _unwrap_model(annotation: Any) -> Any:
    if isinstance(annotation, type) and issubclass(annotation, BaseModel):
        return annotation
    for arg in typing.get_args(annotation):
        found = _unwrap_model(arg)
        if found is not None:
            return found
    return None


_TYPE_WORDS = {
    "float_type": "must be a number", "int_type": "must be a whole number",
    "string_type": "must be text", "list_type": "must be a list", "bool_type": "must be true/false",
    "model_type": "must be a mapping of keys", "dict_type": "must be a mapping of keys",
    "model_attributes_type": "must be a mapping of keys",
    "int_from_float": "must be a whole number",
    "finite_number": "must be a finite number (not NaN or infinity)",
}


def _message(root: type[BaseModel], err: Any) -> tuple[list[tuple[tuple, str, Any]], bool]:
    """One pydantic error -> located problems; the flag says whether to show the value."""
    kind, loc, ctx = err["type"], tuple(err["loc"]), err.get("ctx") or {}
    value = err.get("input")
    if kind == "value_error" and isinstance(ctx.get("error"), Problems):
        return [(loc + p, m, v) for p, m, v in ctx["error"].problems], True
    if kind == "missing":
        return [(loc, "is required", None)], False
    if kind == "extra_forbidden":
        model = _model_at(root, loc[:-1])
        allowed = list(model.model_fields) if model is not None else []
        return [(loc, f"unknown key{did_you_mean(loc[-1], allowed)}; allowed keys: "
                 f"{', '.join(allowed)}", None)], False
    if kind in ("greater_than", "greater_than_equal", "less_than", "less_than_equal"):
        op = {"greater_than": ">", "greater_than_equal": ">=", "less_than": "<",
              "less_than_equal": "<="}[kind]
        limit = next(iter(ctx.values()))
        text = f"out of range; allowed: {op} {_bound(limit)}"
        bounds = _field_bounds(root, loc)
        if bounds:
            text = f"out of range; allowed: {bounds}"
        return [(loc, text, value)], True
    if kind == "literal_error":
        return [(loc, f"not allowed{did_you_mean(value, _literal_options(ctx))}; allowed: "
                 f"{ctx.get('expected')}", value)], True
    if kind in ("too_short", "too_long"):
        lo, hi = _length_bounds(root, loc)
        want = f"exactly {lo}" if lo == hi else f"at least {lo}"
        return [(loc, f"must hold {want} item{'s' if lo != 1 else ''}", value)], True
    if kind == "value_error":
        return [(loc, reason_of(ctx.get("error", err["msg"])), value)], True
    if kind in _TYPE_WORDS:
        return [(loc, _TYPE_WORDS[kind], value)], True
    return [(loc, err["msg"], value)], True


def _literal_options(ctx: dict) -> list[str]:
    return re.findall(r"'([^']*)'", str(ctx.get("expected", "")))


def _field_info(root: type[BaseModel], loc: tuple):
    names = [p for p in loc if isinstance(p, str)]
    if not names:
        return None
    model = _model_at(root, loc[:-1]) if isinstance(loc[-1], str) else None
    if model is None:
        return None
    return model.model_fields.get(loc[-1])


def _constraints(info) -> list:
    """Every constraint object (Gt, Le, MinLen ...) of a field, through Optional/Annotated."""
    found: list = []

    def walk(obj) -> None:
        for m in getattr(obj, "metadata", ()) or ():
            found.append(m)
        for m in getattr(obj, "__metadata__", ()) or ():
            walk(m) if hasattr(m, "metadata") else found.append(m)
        for arg in typing.get_args(obj):
            if arg is not type(None):
                walk(arg)

    walk(info)
    walk(info.annotation)
    return found


def _field_bounds(root: type[BaseModel], loc: tuple) -> str:
    """Both bounds of a numeric field as text ("0 < value <= 90"), from its metadata."""
    info = _field_info(root, loc)
    if info is None:
        return ""
    lo = hi = None
    lo_op = hi_op = ""
    for m in _constraints(info):
        for attr, op in (("gt", "<"), ("ge", "<=")):
            if getattr(m, attr, None) is not None:
                lo, lo_op = getattr(m, attr), op
        for attr, op in (("lt", "<"), ("le", "<=")):
            if getattr(m, attr, None) is not None:
                hi, hi_op = getattr(m, attr), op
    if lo is not None and hi is not None:
        return f"{_bound(lo)} {lo_op} value {hi_op} {_bound(hi)}"
    if lo is not None:
        return f"value {'>' if lo_op == '<' else '>='} {_bound(lo)}"
    if hi is not None:
        return f"value {hi_op} {_bound(hi)}"
    return ""


def _bound(x: Any) -> str:
    """A field bound as text (a long float, such as a derived limit, to 10 digits)."""
    text = str(x)
    return f"{x:.10g}" if isinstance(x, float) and len(text) > 12 else text


def _length_bounds(root: type[BaseModel], loc: tuple) -> tuple[int, int | None]:
    info = _field_info(root, loc)
    lo, hi = 1, None
    if info is not None:
        for m in _constraints(info):
            lo = getattr(m, "min_length", None) or lo
            hi = getattr(m, "max_length", None) or hi
    return lo, hi


def _problems_text(problems: list[tuple[tuple, str, Any, bool]]) -> StudyError:
    lines = []
    for loc, msg, value, show in problems:
        line = f"{format_path(loc)}: {msg}"
        if show and value is not None:
            line += f"; got {show_value(value)}"
        lines.append(line)
    if len(lines) == 1:
        path, _, rest = lines[0].partition(": ")
        err = StudyError(rest, field=path)
    else:
        # One line, every problem numbered (at most _LISTED of them, then how many more).
        listed = " ".join(f"({n}) {line}" for n, line in enumerate(lines[:_LISTED], 1))
        more = f" ... and {len(lines) - _LISTED} more" if len(lines) > _LISTED else ""
        err = StudyError(f"{len(lines)} problems in the study: {listed}{more}")
    err.problems = lines  # type: ignore[attr-defined]
    return err


#: Problems listed in one message; the rest are counted.
_LISTED = 10


def study_error_from(exc: ValidationError, root: type[BaseModel]) -> StudyError:
    """Convert a pydantic ValidationError of model ``root`` into one StudyError listing
    every problem."""
    found: list[tuple[tuple, str, Any, bool]] = []
    for err in exc.errors(include_url=False):
        located, show = _message(root, err)
        for loc, msg, value in located:
            found.append((loc, msg, value, show and value is not None))
    return _problems_text(found)

