"""Reading a study file: safe YAML, validation, and the JSON Schema of the file.

A study file is YAML read with a safe loader (plain data only, no duplicate keys); its
content is validated by :class:`covergrid.study.models.Study`. Every problem found is
reported in one :class:`covergrid.errors.StudyError` whose text names each field by its
dotted path (``constellation[0].walker.planes``), the offending value and what is allowed
(:mod:`covergrid.study.messages`).
"""

from __future__ import annotations

import re
from pathlib import Path
from typing import Any

import yaml
from pydantic import ValidationError

from covergrid.errors import StudyError
from covergrid.study.messages import study_error_from
from covergrid.study.models import Study
from covergrid.study.sections import metric_names

__all__ = ["export_schema", "load_study", "parse_study", "parse_yaml", "with_overrides"]


class _StrictSafeLoader(yaml.SafeLoader):
    """yaml.SafeLoader that also refuses duplicate keys in a mapping."""


def _construct_mapping(loader, node, deep=False):
    keys = set()
    for key_node, _ in node.value:
        key = loader.construct_object(key_node, deep=deep)
        try:
            hashable = key in keys
        except TypeError:
            raise yaml.constructor.ConstructorError(
                None, None, "a mapping key must be plain text", key_node.start_mark) from None
        if hashable:
            raise yaml.constructor.ConstructorError(
                None, None, f"duplicate key {key!r}", key_node.start_mark)
        keys.add(key)
    return yaml.SafeLoader.construct_mapping(loader, node, deep=deep)


_StrictSafeLoader.add_constructor(yaml.resolver.BaseResolver.DEFAULT_MAPPING_TAG,
                                  _construct_mapping)


def _where(mark) -> str:
    return f"line {mark.line + 1}, column {mark.column + 1}" if mark is not None else "?"


def parse_yaml(text: str, source: str = "study file") -> Any:
    """Read YAML text with a safe loader (plain data only, no duplicate keys).

    Raises
    ------
    StudyError
        On a syntax error (with line and column), an object tag or a duplicate key.
    """
    try:
        return yaml.load(text, Loader=_StrictSafeLoader)  # noqa: S506 - a SafeLoader subclass
    except yaml.constructor.ConstructorError as exc:
        mark = exc.problem_mark
        problem = str(exc.problem or "")
        tag = re.search(r"tag '([^']*)'", problem)
        if tag:
            msg = (f"{_where(mark)}: tag {tag.group(1)!r} is not allowed; allowed: plain data "
                   "only (mappings, lists, numbers, text, true/false)")
        else:
            msg = f"{_where(mark)}: {problem}"
        raise StudyError(msg, field=source) from None
    except yaml.MarkedYAMLError as exc:
        mark = exc.problem_mark or exc.context_mark
        what = " ".join(x for x in (exc.context, exc.problem) if x)
        ctx = exc.context_mark
        if ctx is not None and mark is not None and (ctx.line, ctx.column) != (mark.line,
                                                                                mark.column):
            what += f" (the construct starts at {_where(ctx)})"
        raise StudyError(f"{_where(mark)}: YAML syntax error: {what}", field=source) from None
    except yaml.YAMLError as exc:
        raise StudyError(f"YAML error: {exc}", field=source) from None


def parse_study(data: Any, source: str = "study file") -> Study:
    """Validate plain data (as read from YAML) into a :class:`Study`.

    Raises
    ------
    StudyError
        Listing every problem by dotted path, value and what is allowed.
    """
    if data is None:
        raise StudyError("is empty; expected a mapping with keys study, epoch, duration_h, "
                         "step_s, constellation", field=source)
    if not isinstance(data, dict):
        raise StudyError(f"the top level must be a mapping of keys, not {type(data).__name__}",
                         field=source)
    bad_keys = [k for k in data if not isinstance(k, str)]
    if bad_keys:
        raise StudyError(f"top-level keys must be text; got {bad_keys[0]!r}", field=source)
    try:
        return Study.model_validate(data)
    except ValidationError as exc:
        raise study_error_from(exc, Study) from None


def load_study(path: str | Path) -> Study:
    """Read and validate a study file.

    Parameters
    ----------
    path : str or pathlib.Path
        The YAML study file (UTF-8).

    Returns
    -------
    Study
        The validated study.

    Raises
    ------
    StudyError
        If the file cannot be read, is not UTF-8, is not valid YAML or is not a valid study.
    """
    path = Path(path)
    name = path.name or str(path)
    try:
        raw = path.read_bytes()
    except FileNotFoundError:
        raise StudyError("no such file", field=str(path)) from None
    except IsADirectoryError:
        raise StudyError("is a folder, not a study file", field=str(path)) from None
    except OSError as exc:
        raise StudyError(f"cannot read: {exc.strerror}", field=str(path)) from None
    try:
        text = raw.decode("utf-8")
    except UnicodeDecodeError as exc:
        line = raw[: exc.start].count(b"\n") + 1
        raise StudyError(f"not UTF-8 text (byte 0x{raw[exc.start]:02x} on line {line}); "
                         "allowed: UTF-8 text; save the file as UTF-8", field=name) from None
    if text.startswith("\ufeff"):
        text = text[1:]
    return parse_study(parse_yaml(text, source=name), source=name)


def export_schema() -> dict:
    """The JSON Schema of a study file (draft 2020-12), generated from the models."""
    schema = Study.model_json_schema(mode="validation")
    schema["$schema"] = "https://json-schema.org/draft/2020-12/schema"
    schema["title"] = "covergrid study"
    names = metric_names()
    defs = schema.get("$defs", {})
    defs["RequirementSection"]["properties"]["metric"]["enum"] = list(names)
    defs["MapsSection"]["properties"]["metrics"]["items"]["enum"] = list(names)
    return schema


def with_overrides(study: Study, overrides: dict[str, Any], source: str) -> Study:
    """The study with some keys replaced (``{"compute.scheduler": "processes"}``), validated
    again as a whole, so an override obeys every rule a study file does.

    Parameters
    ----------
    study : Study
        A validated study.
    overrides : dict
        Dotted key -> value; keys of sections that are absent are created.
    source : str
        Where the overrides come from, for messages (``--scheduler``).
    """
    data = study.resolved_dict()
    for dotted, value in overrides.items():
        *path, key = dotted.split(".")
        node = data
        for part in path:
            if node.get(part) is None:
                node[part] = {}
            node = node[part]
        node[key] = value
    return parse_study(data, source=source)
