"""Reading a study file: safe, bounded YAML, validation, and the JSON Schema of the file.

A study file is a regular file of at most :data:`MAX_STUDY_FILE_BYTES`, read as YAML with a
safe loader (plain data only, no duplicate keys) whose work is bounded before anything is
built: nesting at most :data:`MAX_YAML_DEPTH` levels deep, and at most
:data:`MAX_YAML_VALUES` values once every alias is counted as the copy it stands for (so a
few hundred bytes of nested aliases, which would expand to hundreds of millions of values,
are refused at once). Its content is validated by :class:`covergrid.study.models.Study`.
Every problem found is reported in one :class:`covergrid.errors.StudyError` whose text
names each field by its dotted path (``constellation[0].walker.planes``), the offending
value and what is allowed (:mod:`covergrid.study.messages`).
"""

from __future__ import annotations

import os
import re
from pathlib import Path
from typing import Any

import yaml
from pydantic import ValidationError

from covergrid.errors import StudyError
from covergrid.study.input_files import InputFileError, read_input_file
from covergrid.study.messages import show_value, study_error_from
from covergrid.study.models import Study
from covergrid.study.sections import metric_names

__all__ = ["MAX_STUDY_FILE_BYTES", "MAX_YAML_DEPTH", "MAX_YAML_INT_DIGITS", "MAX_YAML_VALUES",
           "export_schema", "load_study", "parse_study", "parse_yaml", "read_study_file",
           "with_overrides"]

#: Largest study file read [bytes]. A constellation listed one satellite per line takes
#: about 100 bytes a satellite, so 100,000 satellites (the most a Walker group may hold)
#: fit in about 10 MB.
MAX_STUDY_FILE_BYTES = 16 * 2**20
#: Deepest nesting of mappings and lists (a valid study needs 6 levels: constellation ->
#: group -> satellites -> satellite -> position_km -> number).
MAX_YAML_DEPTH = 32
#: Most values (mappings, lists, keys and scalars) a study file may hold, counting every
#: alias as a full copy of the value it refers to: a listed constellation of 100,000
#: satellites with 7 keys each holds about 1.5 million.
MAX_YAML_VALUES = 4_000_000
#: Most digits of a whole number (every count in a study has at most 6).
MAX_YAML_INT_DIGITS = 40


class _Refused(yaml.MarkedYAMLError):
    """A limit of the bounded loader was passed (reported without "syntax error")."""


class _StrictSafeLoader(yaml.SafeLoader):
    """yaml.SafeLoader that refuses duplicate keys, nesting deeper than MAX_YAML_DEPTH and
    whole numbers longer than MAX_YAML_INT_DIGITS digits."""

    def __init__(self, stream: str) -> None:
        super().__init__(stream)
        self._depth = 0

    def compose_node(self, parent, index):  # type: ignore[no-untyped-def]
        # The composer recurses once per level; stop before Python's recursion limit does.
        self._depth += 1
        try:
            if self._depth > MAX_YAML_DEPTH:
                raise _Refused(
                    None, None, f"lists and mappings nested more than {MAX_YAML_DEPTH} levels "
                    f"deep; allowed: at most {MAX_YAML_DEPTH}", self.peek_event().start_mark)
            return super().compose_node(parent, index)
        finally:
            self._depth -= 1


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
                None, None, f"duplicate key {show_value(key)}", key_node.start_mark)
        keys.add(key)
    return yaml.SafeLoader.construct_mapping(loader, node, deep=deep)


def _construct_int(loader, node):
    digits = sum(c.isdigit() for c in str(node.value))
    if digits > MAX_YAML_INT_DIGITS:
        raise yaml.constructor.ConstructorError(
            None, None, f"a whole number of {digits} digits; allowed: at most "
            f"{MAX_YAML_INT_DIGITS} digits", node.start_mark)
    return yaml.SafeLoader.construct_yaml_int(loader, node)


_StrictSafeLoader.add_constructor(yaml.resolver.BaseResolver.DEFAULT_MAPPING_TAG,
                                  _construct_mapping)
_StrictSafeLoader.add_constructor("tag:yaml.org,2002:int", _construct_int)


def _check_expansion(root: yaml.Node) -> None:
    """Refuse a document that expands past MAX_YAML_VALUES values or MAX_YAML_DEPTH levels.

    Aliases make the composed document a graph whose nodes may be shared; the count is
    memoised per node, so its cost is that of the text, not of the expansion.

    Raises
    ------
    _Refused
        At the node where a limit is passed, or at an alias to a value that holds itself.
    """
    sizes: dict[int, int] = {}
    depths: dict[int, int] = {}

    def fail(node: yaml.Node, what: str) -> None:
        raise _Refused(None, None, what, node.start_mark)

    def deep(node: yaml.Node) -> None:
        fail(node, f"lists and mappings nested more than {MAX_YAML_DEPTH} levels deep once "
             f"aliases are expanded; allowed: at most {MAX_YAML_DEPTH}")

    def walk(node: yaml.Node, level: int) -> int:
        key = id(node)
        if key in sizes:
            if sizes[key] < 0:
                fail(node, "an alias refers to a value that holds it (a recursive value); "
                     "allowed: plain data only")
            if level + depths[key] - 1 > MAX_YAML_DEPTH:
                deep(node)
            return sizes[key]
        if level > MAX_YAML_DEPTH:
            deep(node)
        sizes[key] = -1
        if isinstance(node, yaml.MappingNode):
            children = [n for pair in node.value for n in pair]
        elif isinstance(node, yaml.SequenceNode):
            children = list(node.value)
        else:
            children = []
        total, deepest = 1, 0
        for child in children:
            total += walk(child, level + 1)
            deepest = max(deepest, depths[id(child)])
            if total > MAX_YAML_VALUES:
                fail(node, f"the file expands to more than {MAX_YAML_VALUES:,} values "
                     "(each alias counts as a full copy of the value it refers to); "
                     f"allowed: at most {MAX_YAML_VALUES:,}")
        sizes[key], depths[key] = total, deepest + 1
        return total

    walk(root, 1)


def _where(mark) -> str:
    return f"line {mark.line + 1}, column {mark.column + 1}" if mark is not None else "?"


def parse_yaml(text: str, source: str = "study file") -> Any:
    """Read YAML text with a safe, bounded loader (see the module notes).

    Raises
    ------
    StudyError
        On a syntax error (with line and column), an object tag, a duplicate key, or a
        document nested too deeply or expanding to too many values.
    """
    loader = _StrictSafeLoader(text)
    try:
        node = loader.get_single_node()
        if node is None:
            return None
        _check_expansion(node)
        return loader.construct_document(node)
    except _Refused as exc:
        raise StudyError(f"{_where(exc.problem_mark)}: {exc.problem}", field=source) from None
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
        raise StudyError(f"YAML error: {show_value(str(exc))}", field=source) from None
    except (ValueError, OverflowError) as exc:  # a scalar the constructors cannot build
        raise StudyError(f"a value cannot be read: {show_value(str(exc))}",
                         field=source) from None
    finally:
        loader.dispose()


def parse_study(data: Any, source: str = "study file",
                base_dir: str | os.PathLike | None = None) -> Study:
    """Validate plain data (as read from YAML) into a :class:`Study`.

    Files the study names (a region's GeoJSON, a targets CSV) are relative to ``base_dir``
    (the study file's folder; default the current folder).

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
        raise StudyError(f"top-level keys must be text; got {show_value(bad_keys[0])}",
                         field=source)
    try:
        return Study.model_validate(
            data, context={"base_dir": None if base_dir is None else Path(base_dir)})
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
    raw = read_study_file(path)
    try:
        text = raw.decode("utf-8")
    except UnicodeDecodeError as exc:
        line = raw[: exc.start].count(b"\n") + 1
        raise StudyError(f"not UTF-8 text (byte 0x{raw[exc.start]:02x} on line {line}); "
                         "allowed: UTF-8 text; save the file as UTF-8", field=name) from None
    if text.startswith("\ufeff"):
        text = text[1:]
    return parse_study(parse_yaml(text, source=name), source=name, base_dir=path.parent)


def read_study_file(path: str | os.PathLike) -> bytes:
    """The bytes of a study file: a regular file of at most MAX_STUDY_FILE_BYTES
    (:func:`covergrid.study.input_files.read_input_file`).

    Raises
    ------
    StudyError
        Naming the path: missing, a folder, not a regular file, too large or unreadable.
    """
    try:
        return read_input_file(path, "a study file", MAX_STUDY_FILE_BYTES)
    except InputFileError as exc:
        raise StudyError(exc.reason, field=str(path)) from None


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
    return parse_study(data, source=source)  # its files are inlined: no folder needed
