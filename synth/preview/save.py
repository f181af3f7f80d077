"""Saving the page's values into the patch file: checked first, comments kept, whole or not at all.

The file's text is edited in place (:mod:`synth.preview.yamledit`): only the
values that changed are rewritten, so its comments, alignment and key order
stay exactly as they were.  Before anything is written the new text is read
back and must give the very patch that was validated from the page's values;
then it is written to a temporary name beside the target and renamed
(:class:`synth.audio.atomic_output`).  The target is the opened file or a new
plain file name in its folder, nothing else.
"""
from __future__ import annotations

import os
import re
from dataclasses import replace
from pathlib import Path

from ..errors import COMMAND_LINE, PatchError

__all__ = ["save_values", "save_target", "ExistsError", "SAVE_KEY"]

#: The key of errors about saving: the name, the folder, the disk (``save: ...`` on the page).
SAVE_KEY = "save"
#: Longest file name most file systems take (bytes).
NAME_MAX_BYTES = 255
_CONTROL = re.compile(r"[\x00-\x1f\x7f]")


class ExistsError(PatchError):
    """A save-as name that is already a file: the page asks before replacing it."""


def _refuse(message):
    return PatchError(message, file=COMMAND_LINE, key=SAVE_KEY)


def save_target(opened, name):
    """The file a save writes: `opened` itself (name None or its own name) or `name` in its folder.

    Parameters
    ----------
    opened : Path
        The patch file the page edits.
    name : str or None
        A plain file name ending ``.yaml``: no folder, no path separator, not
        hidden, at most 255 bytes.

    Raises
    ------
    PatchError
        Key ``save``, for any other name.
    """
    opened = Path(opened)
    if name is None or name == "" or name == opened.name:
        return opened
    if not isinstance(name, str):
        raise _refuse("give a file name such as new-patch.yaml")
    if "/" in name or "\\" in name or name in (".", "..") or os.path.basename(name) != name:
        raise _refuse(f"{name[:80]!r} is not a plain file name: saves go into the folder of {opened.name} only")
    if _CONTROL.search(name):
        raise _refuse("a file name cannot hold control characters")
    if name.startswith("."):
        raise _refuse(f"{name[:80]!r} would be a hidden file: give a name that starts with a letter or digit")
    if not name.endswith(".yaml") or name == ".yaml":
        raise _refuse(f"a patch file name ends in .yaml, got {name[:80]!r}")
    if len(os.fsencode(name)) > NAME_MAX_BYTES:
        raise _refuse(f"the name is {len(os.fsencode(name))} bytes long (file systems take at most {NAME_MAX_BYTES})")
    return opened.parent / name


def _read_text(path):
    from ..errors import InputFileError
    from ..yamlio import MAX_YAML_BYTES, read_input_file

    data = read_input_file(path, limit=MAX_YAML_BYTES, kind="YAML",
                           folder_hint="is a folder, not a file: give the YAML file inside it")
    try:
        return data.decode("utf-8")
    except UnicodeDecodeError:
        raise InputFileError("not UTF-8 text: save the file as UTF-8", file=str(path)) from None


def _edited_text(text, patch, overrides, deletions):
    """`text` with `deletions` removed and `overrides` set, as :func:`synth.patch.apply_overrides` sets them."""
    from ..resonators import resonator_module
    from .page import value_text
    from .yamledit import YamlEditError, delete_value, set_value

    try:
        replaced = resonator_module(patch.resonator.TYPE).PITCH_REPLACES
    except (ImportError, KeyError):
        replaced = ()
    try:
        for key in deletions:
            text = delete_value(text, key)
        for key, (value, _option) in overrides.items():
            section, _, name = key.partition(".")
            if section == "resonator" and name == "pitch":  # the pitch drops what it replaces, and back
                for other in replaced:
                    text = delete_value(text, f"resonator.{other}")
            elif section == "resonator" and name in replaced:
                text = delete_value(text, "resonator.pitch")
            text = set_value(text, key, value_text(value))
    except YamlEditError as error:
        raise _refuse(f"cannot edit the file: {error}") from None
    return text


def _reads_back(text, patch, *, file):
    """True if `text` validates to `patch` (the file and line bookkeeping aside)."""
    from ..patch import patch_from_mapping
    from ..yamlio import load_yaml_text

    try:
        saved = patch_from_mapping(load_yaml_text(text, file=file), file=patch.source)
    except PatchError:
        return False
    try:
        return bool(replace(saved, source="") == replace(patch, source=""))
    except (TypeError, ValueError):  # a field that does not compare (an array): not provably the same
        return False


def save_values(opened, values, *, keys, name=None, replace_existing=False):
    """Write the page's control `values` into the patch: `opened` or a new file `name` beside it.

    Parameters
    ----------
    opened : str or Path
        The patch file the page edits (read now, so edits made meanwhile in
        another program are kept wherever the page did not change them).
    values : dict of str -> str
        Control key -> text (see :func:`synth.preview.page.patch_from_values`).
    keys : sequence of str
        The page's control keys.
    name : str or None
        Save as this plain file name in the folder of `opened`
        (:func:`save_target`); None saves `opened` itself.
    replace_existing : bool
        Allow `name` to replace a file that is already there.

    Returns
    -------
    dict
        ``path`` (the file written, a Path), ``changed`` (the keys set or
        removed) and ``written`` (False when `opened` already held these values).

    Raises
    ------
    PatchError
        An invalid value (nothing is written), a refused name, or a file that
        cannot be written (one line each).
    ExistsError
        `name` is an existing file and `replace_existing` is False.
    """
    from ..audio import atomic_output, check_output_file
    from ..yamlio import load_yaml_text
    from .page import patch_from_values

    opened = Path(opened)
    target = save_target(opened, name)
    text = _read_text(opened)
    patch, overrides, deletions = patch_from_values(load_yaml_text(text, file=str(opened)), values,
                                                    file=str(opened), keys=keys)
    changed = sorted(set(overrides) | set(deletions))
    new_text = _edited_text(text, patch, overrides, deletions) if changed else text
    if not _reads_back(new_text, patch, file=str(target)):
        raise _refuse("these values cannot be written so that the file reads back the same: "
                      "write them into the file by hand")
    if target == opened:
        if not changed:
            return {"path": opened, "changed": [], "written": False}
        target = Path(os.path.realpath(opened))  # through a link, to the file itself
    elif os.path.lexists(target):
        if not target.is_file() or target.is_symlink():
            raise _refuse(f"{target.name!r} is not a plain file: give another name")
        if not replace_existing:
            raise ExistsError(f"{target.name} already exists: save again to replace it", file=COMMAND_LINE, key=SAVE_KEY)
    check_output_file(target, suffixes=(".yaml",), key=SAVE_KEY)
    mode = target.stat().st_mode & 0o7777 if target.is_file() else None
    with atomic_output(target, key=SAVE_KEY) as tmp:
        with open(tmp, "w", encoding="utf-8", newline="") as handle:
            handle.write(new_text)
    if mode is not None:
        try:
            os.chmod(target, mode)  # keep the file's own permissions
        except OSError:
            pass
    return {"path": target, "changed": changed, "written": True}
