"""Safe YAML loading that remembers the line of every key.

Only ``yaml.SafeLoader`` is used (no arbitrary Python objects).  Mappings come
back as :class:`LineDict`, a dict that also knows the 1-based line of each
key, so every error can name the line.

Files whose shape no spec needs are refused with one line: keys that are not
names (``~:``, ``yes:``), nesting deeper than :data:`MAX_DEPTH` and more than
:data:`MAX_VALUES` values once aliases (``*name``) are expanded (the
"billion laughs" file, whose expansion would exhaust memory in any code that
walks it).
"""
from __future__ import annotations

import yaml

from .errors import InputFileError
from .units import short_repr

__all__ = ["LineDict", "load_yaml_file", "load_yaml_text", "MAX_DEPTH", "MAX_VALUES"]

#: Deepest nesting of lists and mappings a file may have (a patch needs 4).
MAX_DEPTH = 64
#: Most values (mappings, lists and scalars) a file may hold once aliases are
#: expanded: ten times a partial list of the largest mode count.
MAX_VALUES = 200_000


class LineDict(dict):
    """A dict with ``.line`` (its own line) and ``.lines[key]`` (each key's line)."""

    def __init__(self, *args, **kwargs):
        super().__init__(*args, **kwargs)
        self.line = None
        self.lines = {}


class _LineLoader(yaml.SafeLoader):
    """SafeLoader whose mappings are LineDicts; duplicate keys are errors."""


class _KeyError(yaml.constructor.ConstructorError):
    """A mapping key that is not a plain name, or a duplicate (reported without "YAML syntax error")."""


def _construct_mapping(loader, node):
    loader.flatten_mapping(node)
    mapping = LineDict()
    mapping.line = node.start_mark.line + 1
    for key_node, value_node in node.value:
        key = loader.construct_object(key_node, deep=True)
        try:
            hash(key)
        except TypeError:
            raise yaml.constructor.ConstructorError(
                None, None, "a key must be a plain name", key_node.start_mark
            ) from None
        if isinstance(key, bool) or not isinstance(key, (str, int)):
            raise _KeyError(None, None, _key_problem(key, key_node), key_node.start_mark)
        if key in mapping:
            raise _KeyError(
                None, None, f"duplicate key {key!r}: each key may appear only once in a section", key_node.start_mark
            )
        mapping[key] = loader.construct_object(value_node, deep=True)
        mapping.lines[key] = key_node.start_mark.line + 1
    return mapping


def _key_problem(key, key_node):
    """Message for a key YAML read as null, true/false, a float or a date."""
    written = getattr(key_node, "value", "")
    written = written if isinstance(written, str) else ""
    message = f"keys must be plain names, got {short_repr(key)}"
    if not written:
        return f"{message}: the key is empty"
    if key is None:
        reads = "nothing (null)"
    elif isinstance(key, bool):
        reads = "true/false"
    elif isinstance(key, float):
        reads = "a number with a fraction"
    else:
        reads = f"a {type(key).__name__}"
    return f"{message}: YAML reads {written} as {reads}; put the key in quotes ('{written}':) if it is a name"


_LineLoader.add_constructor(yaml.resolver.BaseResolver.DEFAULT_MAPPING_TAG, _construct_mapping)


def load_yaml_text(text, *, file="<text>"):
    """Parse YAML `text`; every problem becomes one-line InputFileError naming file and line.

    Raises
    ------
    InputFileError
        On a syntax error, a key that is not a name, nesting deeper than
        :data:`MAX_DEPTH` or more than :data:`MAX_VALUES` values after
        expanding aliases.
    """
    try:
        data = yaml.load(text, Loader=_LineLoader)  # noqa: S506 - _LineLoader is a SafeLoader
    except RecursionError:
        raise InputFileError(_too_deep(), file=file, line=_deep_line(text)) from None
    except yaml.YAMLError as error:
        mark = getattr(error, "problem_mark", None) or getattr(error, "context_mark", None)
        line = mark.line + 1 if mark is not None else None
        problem = getattr(error, "problem", None) or str(error).splitlines()[0]
        if isinstance(error, _KeyError):
            raise InputFileError(problem, file=file, line=line) from None
        raise InputFileError(f"YAML syntax error: {problem}", file=file, line=line) from None
    _check_shape(data, file)
    return data


def _too_deep():
    return f"nested too deeply: at most {MAX_DEPTH} levels of lists and mappings"


def _deep_line(text):
    """1-based line where the nesting first goes deeper than MAX_DEPTH (parser events, no recursion)."""
    depth = 0
    try:
        for event in yaml.parse(text, Loader=yaml.SafeLoader):
            if isinstance(event, yaml.CollectionStartEvent):
                depth += 1
                if depth > MAX_DEPTH:
                    return event.start_mark.line + 1
            elif isinstance(event, yaml.CollectionEndEvent):
                depth -= 1
    except (yaml.YAMLError, RecursionError):
        return None
    return None


def _check_shape(data, file):
    """Refuse nesting deeper than MAX_DEPTH and more than MAX_VALUES values (aliases expanded).

    Walks without recursion; an alias counts each time it is used, so a
    recursive alias (``&a [*a]``) is refused too.
    """
    stack = [(data, 1, getattr(data, "line", None))]
    count = 0
    while stack:
        node, depth, line = stack.pop()
        count += 1
        if count > MAX_VALUES:
            raise InputFileError(
                f"too large: more than {MAX_VALUES} values once aliases (*name) are expanded",
                file=file,
                line=line,
            )
        if isinstance(node, dict):
            if depth > MAX_DEPTH:
                raise InputFileError(_too_deep(), file=file, line=line)
            lines = getattr(node, "lines", {})
            stack.extend((value, depth + 1, lines.get(key, line)) for key, value in node.items())
        elif isinstance(node, list):
            if depth > MAX_DEPTH:
                raise InputFileError(_too_deep(), file=file, line=line)
            stack.extend((value, depth + 1, line) for value in node)


def load_yaml_file(path):
    """Read and parse the YAML file at `path` (errors name the file, and the line where known)."""
    file = str(path)
    try:
        with open(path, "rb") as handle:
            data = handle.read()
    except FileNotFoundError:
        raise InputFileError("file not found", file=file) from None
    except IsADirectoryError:
        raise InputFileError("is a folder, not a file: give the YAML file inside it", file=file) from None
    except OSError as error:
        raise InputFileError(f"cannot read: {error.strerror or error}", file=file) from None
    try:
        text = data.decode("utf-8")
    except UnicodeDecodeError as error:
        line = data[: error.start].count(b"\n") + 1
        raise InputFileError(
            f"not UTF-8 text: byte 0x{data[error.start]:02x} cannot be read; save the file as UTF-8",
            file=file,
            line=line,
        ) from None
    return load_yaml_text(text, file=file)
