"""``synth preview``: a local web page to move a patch's controls, hear the change and save the patch.

- :mod:`.page`: controls from a patch file and back, the partial table as the page's JSON;
- :mod:`.save`: writing the values into the file (checked first, comments kept, atomic);
- :mod:`.yamledit`: in-place edits of a YAML file's text;
- :mod:`.server`: the starlette app, its Host/Origin guard and ``run_preview`` (uvicorn);
- ``static/``: the page itself (plain HTML, JavaScript and CSS; no framework, works offline).

The server needs the ``preview`` extra (starlette, uvicorn); nothing here is
imported by ``synth --help``.
"""
from __future__ import annotations

__all__ = ["create_app", "run_preview"]


def create_app(path, *, host="127.0.0.1", port=8765):
    """The preview app of the patch at `path` (:func:`synth.preview.server.create_app`)."""
    from .server import create_app as make

    return make(path, host=host, port=port)


def run_preview(args):
    """``synth preview`` (:func:`synth.preview.server.run_preview`)."""
    from .server import run_preview as run

    return run(args)
