"""Change one value of a YAML file's text in place, leaving every other byte as it was.

The preview page saves a patch by editing its text, not by dumping a parsed
tree again: a dump re-indents, realigns aligned columns and comments, and
rewrites ``null`` as an empty value, where an edit in place changes only the
value that changed.  Where a value lies is read from the marks of PyYAML's
composer (``yaml.compose``, safe loader): each node knows the character index
of its start and end in the text.

Three edits cover every control of the page:

- replace a value at a dotted key path (the span of the old value takes the
  new value's text; a comment after it stays);
- add a key that is not there (a new line at the indentation of its block
  mapping, or ``, key: value`` before a flow mapping's closing brace; a missing
  mapping on the way is written as a flow mapping, ``pickup: {position: 0.9}``);
- remove a key (its lines in a block mapping, its item in a flow mapping).

The caller checks the result by reading it back (:mod:`synth.preview.save`).
"""
from __future__ import annotations

import yaml

__all__ = ["set_value", "delete_value", "YamlEditError"]

_NULL_TAG = "tag:yaml.org,2002:null"


class YamlEditError(ValueError):
    """A key path that runs through a value that is not a mapping, or text that is not a YAML mapping."""


def _compose(text):
    try:
        root = yaml.compose(text, Loader=yaml.SafeLoader)
    except yaml.YAMLError as error:
        raise YamlEditError(f"the file is no longer YAML ({str(error).splitlines()[0]})") from None
    if not isinstance(root, yaml.MappingNode):
        raise YamlEditError("the file is not a YAML mapping")
    return root


def _find(mapping, key):
    """(key node, value node) of `key` in a MappingNode, or None."""
    for key_node, value_node in mapping.value:
        if isinstance(key_node, yaml.ScalarNode) and key_node.value == key:
            return key_node, value_node
    return None


def _is_flow(node):
    return bool(getattr(node, "flow_style", False))


def _is_null(node):
    return isinstance(node, yaml.ScalarNode) and node.tag == _NULL_TAG


def _leaf_end(node):
    """Index just after the last character of `node`'s own text (the last leaf of a block collection)."""
    if isinstance(node, yaml.ScalarNode) or _is_flow(node) or not node.value:
        return node.end_mark.index
    last = node.value[-1]
    return _leaf_end(last[1] if isinstance(node, yaml.MappingNode) else last)


def _line_end(text, index):
    """Index just after the newline that ends the line holding `index` (the end of the text if none)."""
    newline = text.find("\n", index)
    return len(text) if newline < 0 else newline + 1


def _line_start(text, index):
    return text.rfind("\n", 0, index) + 1


def _newline(text):
    return "\r\n" if "\r\n" in text else "\n"


def _nested(parts, value_text):
    """``{a: {b: VALUE}}`` for parts ``[a, b]``: a flow mapping holding the rest of a key path."""
    for part in reversed(parts):
        value_text = f"{{{part}: {value_text}}}"
    return value_text


def _colon_end(text, key_node):
    """Index just after the ':' that follows `key_node`."""
    colon = text.find(":", key_node.end_mark.index)
    return key_node.end_mark.index if colon < 0 else colon + 1


def _replace(text, key_node, value_node, value_text):
    if isinstance(value_node, yaml.ScalarNode) and value_node.start_mark.index == value_node.end_mark.index:
        at = value_node.start_mark.index  # an empty value (``key:``): right after the colon
        return f"{text[:at]} {value_text}{text[at:]}"
    if isinstance(value_node, yaml.ScalarNode) or _is_flow(value_node):
        start, end = value_node.start_mark.index, value_node.end_mark.index
        return text[:start] + value_text + text[end:]
    # a block collection: the new value goes on the key's line, in place of the lines it held
    start, end = _colon_end(text, key_node), _leaf_end(value_node)
    return f"{text[:start]} {value_text}{text[end:]}"


def _insert(text, mapping, key, value_text):
    if _is_flow(mapping):
        if mapping.value:
            at = _leaf_end(mapping.value[-1][1])
            return f"{text[:at]}, {key}: {value_text}{text[at:]}"
        at = text.rfind("}", mapping.start_mark.index, mapping.end_mark.index)
        return f"{text[:at]}{key}: {value_text}{text[at:]}"
    newline = _newline(text)
    if mapping.value:
        first_key = mapping.value[0][0]
        indent = first_key.start_mark.column
        at = _line_end(text, _leaf_end(mapping))
    else:  # an empty block mapping cannot be written; the root of an empty document
        indent, at = 0, len(text)
    head = "" if at == 0 or text[at - 1] == "\n" else newline
    return f"{text[:at]}{head}{' ' * indent}{key}: {value_text}{newline}{text[at:]}"


def set_value(text, path, value_text):
    """`text` with the value at dotted `path` replaced by (or set to) `value_text`.

    Parameters
    ----------
    text : str
        A YAML document whose root is a mapping.
    path : str
        Dotted key path, e.g. ``excitation.position.radius``.
    value_text : str
        The new value as YAML text that reads as one value on one line, in a
        block or a flow context (see :func:`synth.preview.page.value_text`).

    Returns
    -------
    str

    Raises
    ------
    YamlEditError
        If a key on the path holds a value that is not a mapping (nor empty).

    Examples
    --------
    >>> print(set_value("a:\\n  b: 1   # one\\nc: 2\\n", "a.b", "650 mm"), end="")
    a:
      b: 650 mm   # one
    c: 2
    >>> print(set_value("a: {x: 1}\\n", "a.y", "2"), end="")
    a: {x: 1, y: 2}
    >>> print(set_value("a:\\n  b: 1\\n", "d.e", "3"), end="")
    a:
      b: 1
    d: {e: 3}
    """
    parts = path.split(".")
    node = _compose(text)
    for i, part in enumerate(parts):
        rest = parts[i + 1:]
        found = _find(node, part)
        if found is None:
            return _insert(text, node, part, _nested(rest, value_text))
        key_node, value_node = found
        if not rest:
            return _replace(text, key_node, value_node, value_text)
        if isinstance(value_node, yaml.MappingNode):
            node = value_node
            continue
        if _is_null(value_node):
            return _replace(text, key_node, value_node, _nested(rest, value_text))
        raise YamlEditError(f"{'.'.join(parts[:i + 1])} is not a mapping here: set {'.'.join(parts[:i + 1])} itself")
    raise AssertionError("unreachable")  # pragma: no cover


def delete_value(text, path):
    """`text` without the key at dotted `path` (unchanged if it is not there).

    Examples
    --------
    >>> print(delete_value("a:\\n  b: 1   # one\\n  c: 2\\n", "a.b"), end="")
    a:
      c: 2
    >>> print(delete_value("p: {radius: 0.3, angle: 20 deg}\\n", "p.angle"), end="")
    p: {radius: 0.3}
    """
    parts = path.split(".")
    node = _compose(text)
    for part in parts[:-1]:
        found = _find(node, part)
        if found is None or not isinstance(found[1], yaml.MappingNode):
            return text
        node = found[1]
    items = node.value
    index = next((i for i, (k, _v) in enumerate(items)
                  if isinstance(k, yaml.ScalarNode) and k.value == parts[-1]), None)
    if index is None:
        return text
    key_node, value_node = items[index]
    if _is_flow(node):
        if index + 1 < len(items):
            start, end = key_node.start_mark.index, items[index + 1][0].start_mark.index
        elif index > 0:
            start, end = _leaf_end(items[index - 1][1]), _leaf_end(value_node)
        else:
            start, end = key_node.start_mark.index, _leaf_end(value_node)
        return text[:start] + text[end:]
    start = key_node.start_mark.index
    line_start = _line_start(text, start)
    if not text[line_start:start].strip():
        start = line_start
    return text[:start] + text[_line_end(text, _leaf_end(value_node)):]
