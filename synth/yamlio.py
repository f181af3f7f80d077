"""Safe YAML loading that remembers the line of every key.

Only ``yaml.SafeLoader`` is used (no arbitrary Python objects).  Mappings come
back as :class:`LineDict`, a dict that also knows the 1-based line of each
key, so every error can name the line.
"""
from __future__ import annotations

import yaml

from .errors import InputFileError

__all__ = ["LineDict", "load_yaml_file", "load_yaml_text"]


class LineDict(dict):
    """A dict with ``.line`` (its own line) and ``.lines[key]`` (each key's line)."""

    def __init__(self, *args, **kwargs):
        super().__init__(*args, **kwargs)
        self.line = None
        self.lines = {}


class _LineLoader(yaml.SafeLoader):
    """SafeLoader whose mappings are LineDicts; duplicate keys are errors."""


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
        if key in mapping:
            raise yaml.constructor.ConstructorError(
                None, None, f"duplicate key {key!r}", key_node.start_mark
            )
        mapping[key] = loader.construct_object(value_node, deep=True)
        mapping.lines[key] = key_node.start_mark.line + 1
    return mapping


_LineLoader.add_constructor(yaml.resolver.BaseResolver.DEFAULT_MAPPING_TAG, _construct_mapping)


def load_yaml_text(text, *, file="<text>"):
    """Parse YAML `text`; syntax errors become InputFileError naming file and line."""
    try:
        return yaml.load(text, Loader=_LineLoader)  # noqa: S506 - _LineLoader is a SafeLoader
    except yaml.YAMLError as error:
        mark = getattr(error, "problem_mark", None) or getattr(error, "context_mark", None)
        line = mark.line + 1 if mark is not None else None
        problem = getattr(error, "problem", None) or str(error).splitlines()[0]
        if problem.startswith("duplicate key"):
            raise InputFileError(f"{problem}: each key may appear only once in a section", file=file, line=line) from None
        raise InputFileError(f"YAML syntax error: {problem}", file=file, line=line) from None


def load_yaml_file(path):
    """Read and parse the YAML file at `path` (errors name the file)."""
    try:
        with open(path, encoding="utf-8") as handle:
            text = handle.read()
    except FileNotFoundError:
        raise InputFileError("file not found", file=str(path)) from None
    except (OSError, UnicodeDecodeError) as error:
        raise InputFileError(f"cannot read: {error}", file=str(path)) from None
    return load_yaml_text(text, file=str(path))
