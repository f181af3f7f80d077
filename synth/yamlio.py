"""Safe YAML loading that remembers the line of every key.

Only ``yaml.SafeLoader`` is used (no arbitrary Python objects).  Mappings come
back as :class:`LineDict`, a dict that also knows the 1-based line of each
key, so every error can name the line.

Files whose shape no spec needs are refused with one line: files larger than
:data:`MAX_YAML_BYTES` (before parsing), paths that are not regular files
(folders, devices, FIFOs: never read), keys that are not names (``~:``,
``yes:``), nesting deeper than :data:`MAX_DEPTH` and more than
:data:`MAX_VALUES` values once aliases (``*name``) are expanded (the
"billion laughs" file, whose expansion would exhaust memory in any code that
walks it); the parser itself stops at the value after MAX_VALUES.
"""
from __future__ import annotations

import os
import stat

import yaml

from .errors import InputFileError
from .units import short_repr

__all__ = ["LineDict", "load_yaml_file", "load_yaml_text", "read_input_file", "MAX_DEPTH", "MAX_VALUES",
           "MAX_YAML_BYTES"]

#: Deepest nesting of lists and mappings a file may have (a patch needs 4).
MAX_DEPTH = 64
#: Most values (mappings, lists and scalars) a file may hold once aliases are
#: expanded: ten times a partial list of the largest mode count.
MAX_VALUES = 200_000
#: Largest YAML file (patch, library spec, map, instrument) read, checked
#: before parsing.  The largest file a spec allows, a partial set of 20000
#: partials (resonators.partials.MAX_PARTIALS) with ratios, t60 and levels_db
#: written at full float precision, measured 1.18 MB; 2 MiB leaves room for
#: comments and units.  Below this size the value limit bounds the work: the
#: parser stops at the value after MAX_VALUES, so the worst file of 2 MiB (one-
#: digit values) is refused after 10 s and 152 MB peak RSS, where a 4 MB file
#: was parsed whole (45 s, 1.4 GB) before it was refused.  A 2 MiB string or
#: comment parses in under 2 s.
MAX_YAML_BYTES = 2 * 2**20


class LineDict(dict):
    """A dict with ``.line`` (its own line), ``.lines[key]`` (each key's line) and
    ``.origins[key]`` (the command-line option that set a key, e.g. ``--set resonator.length``)."""

    def __init__(self, *args, **kwargs):
        super().__init__(*args, **kwargs)
        self.line = None
        self.lines = {}
        self.origins = {}


class _TooManyValues(Exception):
    """Raised by the loader at the value after MAX_VALUES (``line`` is 1-based)."""

    def __init__(self, line):
        super().__init__(line)
        self.line = line


class _LineLoader(yaml.SafeLoader):
    """SafeLoader whose mappings are LineDicts; duplicate keys are errors.

    Counts the nodes it composes (an alias counts each time it is used) and
    stops at the one after :data:`MAX_VALUES`, so a file of many small values
    is refused without being parsed to its end.
    """

    def __init__(self, stream):
        super().__init__(stream)
        self._nodes = 0

    def compose_node(self, parent, index):
        self._nodes += 1
        if self._nodes > MAX_VALUES:
            raise _TooManyValues(self.peek_event().start_mark.line + 1)
        return super().compose_node(parent, index)


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
    except _TooManyValues as error:
        raise InputFileError(_too_many(), file=file, line=error.line) from None
    except yaml.YAMLError as error:
        mark = getattr(error, "problem_mark", None) or getattr(error, "context_mark", None)
        line = mark.line + 1 if mark is not None else None
        problem = getattr(error, "problem", None) or str(error).splitlines()[0]
        if isinstance(error, _KeyError):
            raise InputFileError(problem, file=file, line=line) from None
        raise InputFileError(f"YAML syntax error: {problem}", file=file, line=line) from None
    except (ValueError, TypeError, KeyError, AttributeError, OverflowError) as error:
        # PyYAML's constructors raise these for an explicit tag the text does not fit
        # (`!!float x`, `!!timestamp 2001-99-99`, `!!map [1]`) and for integers too long to convert.
        raise InputFileError(f"a value YAML cannot read as written ({_plain_problem(error)}); check explicit "
                             "tags such as !!float and very long numbers", file=file) from None
    _check_shape(data, file)
    return data


def _plain_problem(error):
    """The first line of `error`'s message, short, without Python's class name."""
    text = str(error).strip().splitlines()[0] if str(error).strip() else "unreadable value"
    return text if len(text) <= 120 else text[:117] + "..."


def _too_many():
    return f"too large: more than {MAX_VALUES} values once aliases (*name) are expanded"


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
            raise InputFileError(_too_many(), file=file, line=line)
        if isinstance(node, dict):
            if depth > MAX_DEPTH:
                raise InputFileError(_too_deep(), file=file, line=line)
            lines = getattr(node, "lines", {})
            stack.extend((value, depth + 1, lines.get(key, line)) for key, value in node.items())
        elif isinstance(node, list):
            if depth > MAX_DEPTH:
                raise InputFileError(_too_deep(), file=file, line=line)
            stack.extend((value, depth + 1, line) for value in node)


_NOT_REGULAR = (
    (stat.S_ISCHR, "a character device"),
    (stat.S_ISBLK, "a block device"),
    (stat.S_ISFIFO, "a pipe (FIFO)"),
    (stat.S_ISSOCK, "a socket"),
)


def _shown(path):
    """`path` as text for a one-line message: NUL and other control characters escaped."""
    text = os.fsdecode(path) if isinstance(path, bytes) else str(path)
    return "".join(c if c.isprintable() else ("\\0" if c == "\0" else repr(c)[1:-1]) for c in text)


def _size_text(n):
    if n >= 2**20 and n % 2**20 == 0:
        return f"{n // 2**20} MiB ({n} bytes)"
    return f"{n} bytes"


def file_problem(path):
    """None if `path` names a regular file; else why not: "not found", "a folder" or the system's words.

    For checks made before reading (a patch named inside another file): unlike
    ``Path.is_file()``, a name too long for the file system, a loop of links or
    a NUL byte is an answer here, not an exception.
    """
    try:
        st = os.stat(path)
    except ValueError:
        return "the path contains a NUL byte"
    except (FileNotFoundError, NotADirectoryError):
        return "not found"
    except OSError as error:
        return (error.strerror or str(error)).lower()
    if stat.S_ISDIR(st.st_mode):
        return "a folder"
    if not stat.S_ISREG(st.st_mode):
        return "not a regular file"
    return None


def read_input_file(path, *, limit, kind, folder_hint):
    """The bytes of the regular file at `path`, at most `limit` of them; never reads anything else.

    Parameters
    ----------
    path : str or os.PathLike
    limit : int
        Largest size accepted (bytes); at most ``limit + 1`` bytes are read,
        whatever the file system says the size is.
    kind : str
        What the file is, for messages ("YAML", "MIDI").
    folder_hint : str
        The message for a folder.

    Raises
    ------
    InputFileError
        Naming the file: a NUL byte in the path, missing, a folder, not a
        regular file (a device, FIFO or socket: refused without a read),
        unreadable, or larger than `limit`.
    """
    shown = _shown(path)

    def refuse(message):
        return InputFileError(message, file=shown)

    def check(st):
        if stat.S_ISDIR(st.st_mode):
            raise refuse(folder_hint)
        if not stat.S_ISREG(st.st_mode):
            what = next((name for test, name in _NOT_REGULAR if test(st.st_mode)), "a special file")
            raise refuse(f"is {what}, not a regular file: give the path of a {kind} file")
        if st.st_size > limit:
            raise refuse(f"too large: {st.st_size} bytes; {allowed}")

    allowed = f"a {kind} file may be at most {_size_text(limit)}"
    # stat first, so a device is never opened; open without waiting (a FIFO put in its place meanwhile) and
    # without becoming a controlling terminal; fstat again, for what was opened.
    flags = os.O_RDONLY | getattr(os, "O_BINARY", 0) | getattr(os, "O_NONBLOCK", 0) | getattr(os, "O_NOCTTY", 0)
    try:
        check(os.stat(path))
        fd = os.open(path, flags)
    except InputFileError:
        raise
    except ValueError:  # what stat and open raise for "embedded null byte"
        raise refuse("the path contains a NUL byte (\\0), which no file name can hold") from None
    except FileNotFoundError:
        raise refuse("file not found") from None
    except IsADirectoryError:
        raise refuse(folder_hint) from None
    except OSError as error:
        raise refuse(f"cannot read: {error.strerror or error}") from None
    with os.fdopen(fd, "rb") as handle:
        check(os.fstat(fd))
        try:
            data = handle.read(limit + 1)
        except OSError as error:
            raise refuse(f"cannot read: {error.strerror or error}") from None
    if len(data) > limit:  # the file grew, or its size was not known (/proc)
        raise refuse(f"too large: more than {limit} bytes; {allowed}")
    return data


def load_yaml_file(path):
    """Read and parse the YAML file at `path` (errors name the file, and the line where known).

    Files over :data:`MAX_YAML_BYTES` and paths that are not regular files are
    refused before anything is parsed (see :func:`read_input_file`).
    """
    file = str(path)
    data = read_input_file(path, limit=MAX_YAML_BYTES, kind="YAML",
                           folder_hint="is a folder, not a file: give the YAML file inside it")
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
