"""``synth preview PATCH``: a local page to move a patch's controls, hear and see the change, and save it.

A starlette app served by uvicorn on 127.0.0.1 (this machine only) by default.
Its JSON API:

- ``GET /`` the page (``/static/app.js``, ``/static/style.css``: files of this package);
- ``GET /api/patch`` the controls (:func:`synth.preview.page.controls_of`);
- ``POST /api/solve`` ``{"values": {key: text}, "units": ...}`` -> the partial
  table, its parameter lines, warnings and a quick figure (:func:`synth.preview.page.table_payload`);
- ``POST /api/figure`` ``{"values": ...}`` -> the full partials figure as SVG
  (:func:`synth.plots.partials_figure`; about a second, so the page asks for
  it once the values settle);
- ``GET /api/render.wav?KEY=TEXT&...`` the server's own render of those values
  (as ``synth render`` makes it);
- ``POST /api/save`` ``{"values": ..., "name": null | "new.yaml", "replace": false}``
  (:func:`synth.preview.save.save_values`).

Every request whose ``Host`` is not this server's own address, or whose
``Origin`` is another site's, is refused (403): another web page cannot reach
the API through DNS rebinding, nor post to it.  User errors come back as
``{"ok": false, "error": one line, "key": the control}`` (status 200 from the
JSON endpoints, 400 from the WAV one; see :func:`_call`).
"""
from __future__ import annotations

import errno
import ipaddress
import json
import socket
import sys
import threading
import time
import webbrowser
from pathlib import Path

from ..errors import ModalError, PatchError, option_error

__all__ = ["create_app", "run_preview", "bind_socket", "make_server", "allowed_hosts", "MAX_BODY_BYTES"]

#: Largest request body accepted (bytes): control values, not files.
MAX_BODY_BYTES = 1 << 20
#: Longest render the page asks the server for (s); ``synth render`` writes longer ones.
MAX_RENDER_S = 60.0
#: How long uvicorn waits for open connections after Ctrl-C (s).
GRACEFUL_SHUTDOWN_S = 2
_STATIC = {
    "app.js": "text/javascript; charset=utf-8",
    "style.css": "text/css; charset=utf-8",
}
#: Sent with every response: no framing, no sniffing, scripts and requests to this server only.
_SECURITY_HEADERS = [
    (b"content-security-policy", b"default-src 'self'; script-src 'self'; style-src 'self' 'unsafe-inline'; "
                                 b"img-src 'self' data:; media-src 'self' blob:; connect-src 'self'; "
                                 b"frame-ancestors 'none'; base-uri 'none'; form-action 'none'"),
    (b"x-content-type-options", b"nosniff"),
    (b"referrer-policy", b"no-referrer"),
    (b"cache-control", b"no-store"),
]


def _require():
    """Import starlette and uvicorn, or one line saying how to install them."""
    from importlib.util import find_spec

    missing = [name for name in ("starlette", "uvicorn") if find_spec(name) is None]
    if missing:
        raise option_error(f"needs the preview extra ({' and '.join(missing)} not installed): "
                           "pip install '.[preview]'", "preview")


def _url_host(host):
    """`host` as it appears in a URL and a Host header (an IPv6 address in brackets)."""
    return f"[{host}]" if ":" in host else host


def _is_loopback(host):
    if host.lower() == "localhost":
        return True
    try:
        return ipaddress.ip_address(host).is_loopback
    except ValueError:
        return False


def _is_any(host):
    return host in ("0.0.0.0", "::", "")


def allowed_hosts(host, port):
    """The Host headers this server answers to: 127.0.0.1, localhost and `host`, each with `port`.

    Examples
    --------
    >>> sorted(allowed_hosts("127.0.0.1", 8765))
    ['127.0.0.1:8765', 'localhost:8765']
    """
    names = {"127.0.0.1", "localhost", _url_host(host).lower()} - {""}
    hosts = {f"{name}:{port}" for name in names}
    if port == 80:  # a browser leaves out the default port
        hosts |= names
    return hosts


class _Guard:
    """ASGI middleware: refuses foreign Host and Origin headers, checks POST bodies, adds security headers."""

    def __init__(self, app, hosts):
        self.app = app
        self.hosts = frozenset(hosts)
        self.origins = frozenset(f"http://{h}" for h in hosts)

    def _problem(self, scope):
        headers = {}
        for name, value in scope.get("headers", ()):
            headers.setdefault(name.decode("latin-1").lower(), []).append(value.decode("latin-1"))
        host = headers.get("host", [])
        if len(host) != 1 or host[0].lower() not in self.hosts:
            return 403, "this page answers only to its own address (" + ", ".join(sorted(self.hosts)) + ")"
        origin = headers.get("origin", [])
        if origin and (len(origin) != 1 or origin[0].lower() not in self.origins):
            return 403, "requests from other sites are refused"
        if scope["path"].startswith("/api/") and "cross-site" in headers.get("sec-fetch-site", []):
            return 403, "requests from other sites are refused"
        if scope["method"] == "POST":
            kind = (headers.get("content-type") or [""])[0].split(";")[0].strip().lower()
            if kind != "application/json":
                return 415, "send the request body as application/json"
            try:
                length = int((headers.get("content-length") or ["0"])[0])
            except ValueError:
                return 400, "a bad Content-Length"
            if length > MAX_BODY_BYTES:
                return 413, f"a request body may be at most {MAX_BODY_BYTES} bytes"
        return None

    async def __call__(self, scope, receive, send):
        if scope["type"] != "http":
            if scope["type"] == "websocket":
                await send({"type": "websocket.close", "code": 1008})
                return
            await self.app(scope, receive, send)
            return

        async def secured(message):
            if message["type"] == "http.response.start":
                message = dict(message)
                message["headers"] = list(message.get("headers", [])) + _SECURITY_HEADERS
            await send(message)

        problem = self._problem(scope)
        if problem is not None:
            from starlette.responses import JSONResponse

            status, text = problem
            await JSONResponse({"ok": False, "error": text, "key": None}, status_code=status)(scope, receive, secured)
            return
        await self.app(scope, receive, secured)


class _Preview:
    """What the endpoints do, on the patch file the page edits (sync: run in a worker thread, one at a time)."""

    def __init__(self, path):
        self.path = Path(path)
        self.lock = threading.Lock()  # solves (the solve cache) and saves, one at a time
        self.figure_lock = threading.Lock()  # matplotlib, one figure at a time
        self.figures_asked = 0  # figure requests so far: one overtaken while it waits is not drawn

    def _base(self):
        """(mapping, patch, control keys) of the file as it is on disk now."""
        from ..instrument_file import is_instrument_mapping
        from ..patch import patch_from_mapping
        from ..yamlio import load_yaml_file
        from .page import controls_of

        mapping = load_yaml_file(self.path)
        if is_instrument_mapping(mapping):
            raise PatchError("is an instrument file; synth preview edits a patch (an instrument names its base "
                             "patch under patch:)", file=str(self.path), line=1)
        patch = patch_from_mapping(mapping, file=str(self.path))
        return mapping, patch, controls_of(mapping, patch)

    def describe(self):
        from ..cli import LISTENING_CAUTION
        from ..labels import DEFAULT_UNITS, UNIT_SYSTEMS

        with self.lock:
            _mapping, patch, controls = self._base()
        return {"ok": True, "file": self.path.name, "name": patch.name, "resonator": patch.resonator.TYPE,
                "controls": controls, "caution": LISTENING_CAUTION, "units": list(UNIT_SYSTEMS),
                "default_units": DEFAULT_UNITS}

    def _patch(self, values):
        from .page import patch_from_values

        mapping, _patch, controls = self._base()
        patch, _, _ = patch_from_values(mapping, values, file=str(self.path), keys=[c["key"] for c in controls])
        return patch

    def solve(self, values, units):
        from ..labels import UNIT_SYSTEMS
        from ..pipeline import partial_table
        from .page import table_payload

        if units not in UNIT_SYSTEMS:
            raise option_error(f"units must be one of {', '.join(UNIT_SYSTEMS)}, got {str(units)[:40]!r}", "units")
        with self.lock:
            patch = self._patch(values)
            table = partial_table(patch, onset=False)  # a report's table, as synth modes makes it
            return table_payload(table, patch, units=units)

    def figure(self, values):
        from ..pipeline import partial_table
        from .page import figure_svg

        with self.lock:
            self.figures_asked += 1
            asked = self.figures_asked
            table = partial_table(self._patch(values), onset=False)
        with self.figure_lock:
            if asked != self.figures_asked:
                return {"ok": False, "stale": True, "error": "a newer figure was asked for", "key": None}
            return {"ok": True, "figure_svg": figure_svg(table)}

    def render(self, values):
        from ..api import render
        from ..audio import dither_gain, encode_wav, quantise, sampler_fields
        from ..units import hz_to_midi

        with self.lock:
            patch = self._patch(values)
            duration = patch.render.duration
            if duration != "auto" and duration > MAX_RENDER_S:
                raise patch.error("render.duration", f"the page plays at most {MAX_RENDER_S:g} s; "
                                                     "synth render writes longer files")
            heard = render(patch)
        data = quantise(heard.signal, heard.bit_depth,
                        dither=dither_gain(len(heard.signal), sample_rate=heard.sample_rate))
        sampler = sampler_fields(float(hz_to_midi(heard.table.fundamental_hz)))
        return patch.name, encode_wav(data, sample_rate=heard.sample_rate, bit_depth=heard.bit_depth, sampler=sampler)

    def save(self, values, name, replace_existing):
        from .save import save_values

        with self.lock:
            _mapping, _patch, controls = self._base()
            result = save_values(self.path, values, keys=[c["key"] for c in controls], name=name,
                                 replace_existing=bool(replace_existing))
            if name and name != self.path.name:
                self.path = self.path.parent / name  # a save-as: the page edits the new file from now on
        return {"ok": True, "file": self.path.name, "changed": result["changed"], "written": result["written"]}


def _numeric_errors():
    numpy = sys.modules.get("numpy")
    extra = (numpy.linalg.LinAlgError,) if numpy is not None else ()
    return (ArithmeticError, MemoryError, RecursionError) + extra


async def _call(work, *args, user_status=200):
    """Run `work(*args)` in a worker thread; a user error becomes the page's one-line JSON with `user_status`.

    The JSON endpoints answer values that are not a valid patch with status
    200 and ``"ok": false`` (the request was understood; its answer is the
    error line), so a browser's console does not log each half-typed value
    as a failed request; a save-as onto an existing file adds ``"exists":
    true``.  The WAV endpoint uses 400 (its body is then JSON, not audio).
    """
    from starlette.concurrency import run_in_threadpool
    from starlette.responses import JSONResponse

    from .page import error_payload
    from .save import ExistsError

    try:
        return await run_in_threadpool(work, *args)
    except ModalError as error:
        payload = error_payload(error)
        if isinstance(error, ExistsError):
            payload["exists"] = True
        return JSONResponse(payload, status_code=user_status)
    except Exception as error:  # noqa: BLE001 - only the numeric failures are the user's to fix
        if not isinstance(error, _numeric_errors()):
            raise
        text = f"cannot compute this request ({type(error).__name__}): check that sizes and frequencies are physically sensible"
        return JSONResponse({"ok": False, "error": text, "key": None}, status_code=user_status)


async def _body(request):
    """The JSON object of a POST, or None if it is not one."""
    raw = await request.body()
    if len(raw) > MAX_BODY_BYTES:
        return None
    try:
        data = json.loads(raw)
    except (ValueError, UnicodeDecodeError):
        return None
    return data if isinstance(data, dict) else None


def _static_text(name):
    from importlib.resources import files

    return files("synth.preview").joinpath("static", name).read_text(encoding="utf-8")


def create_app(path, *, host="127.0.0.1", port=8765):
    """The preview app for the patch file at `path`, answering to `host`:`port` (and 127.0.0.1 / localhost).

    Parameters
    ----------
    path : str or Path
        The patch file the page edits and saves.
    host : str
        The address served on (its Host header is accepted).
    port : int
        The port actually served on (Host headers name it).

    Returns
    -------
    ASGI application
    """
    _require()
    from starlette.applications import Starlette
    from starlette.responses import JSONResponse, Response
    from starlette.routing import Route

    preview = _Preview(path)
    bad_body = {"ok": False, "error": "send a JSON object", "key": None}

    async def page(request):
        return Response(_static_text("index.html"), media_type="text/html; charset=utf-8")

    async def static(request):
        name = request.path_params["name"]
        if name not in _STATIC:
            return JSONResponse({"ok": False, "error": "not found", "key": None}, status_code=404)
        return Response(_static_text(name), media_type=_STATIC[name])

    async def api_patch(request):
        result = await _call(preview.describe)
        return result if isinstance(result, Response) else JSONResponse(result)

    async def api_solve(request):
        body = await _body(request)
        if body is None:
            return JSONResponse(bad_body, status_code=400)
        from ..labels import DEFAULT_UNITS

        result = await _call(preview.solve, body.get("values", {}), body.get("units", DEFAULT_UNITS))
        return result if isinstance(result, Response) else JSONResponse(result)

    async def api_figure(request):
        body = await _body(request)
        if body is None:
            return JSONResponse(bad_body, status_code=400)
        result = await _call(preview.figure, body.get("values", {}))
        return result if isinstance(result, Response) else JSONResponse(result)

    async def api_render(request):
        result = await _call(preview.render, dict(request.query_params), user_status=400)
        if isinstance(result, Response):
            return result
        name, wav = result
        return Response(wav, media_type="audio/wav",
                        headers={"content-disposition": f'inline; filename="{name}-preview.wav"'})

    async def api_save(request):
        body = await _body(request)
        if body is None:
            return JSONResponse(bad_body, status_code=400)
        result = await _call(preview.save, body.get("values", {}), body.get("name"), body.get("replace", False))
        return result if isinstance(result, Response) else JSONResponse(result)

    routes = [
        Route("/", page, methods=["GET"]),
        Route("/static/{name}", static, methods=["GET"]),
        Route("/api/patch", api_patch, methods=["GET"]),
        Route("/api/solve", api_solve, methods=["POST"]),
        Route("/api/figure", api_figure, methods=["POST"]),
        Route("/api/render.wav", api_render, methods=["GET"]),
        Route("/api/save", api_save, methods=["POST"]),
    ]
    app = Starlette(routes=routes)
    return _Guard(app, allowed_hosts(host, port))


def bind_socket(host, port):
    """A listening TCP socket on `host`:`port` (port 0: any free one); one line naming the option if it cannot be.

    Returns
    -------
    socket.socket
        Its ``getsockname()[1]`` is the port.
    """
    if not isinstance(port, int) or not 0 <= port <= 65535:
        raise option_error(f"must be a port number 0..65535 (0: any free port), got {port}", "--port")
    try:
        family, kind, proto, _, address = socket.getaddrinfo(host or None, port, type=socket.SOCK_STREAM,
                                                             flags=socket.AI_PASSIVE)[0]
    except (socket.gaierror, UnicodeError) as error:
        raise option_error(f"cannot serve on {host!r}: {getattr(error, 'strerror', None) or error}", "--host") from None
    sock = socket.socket(family, kind, proto)
    try:
        sock.setsockopt(socket.SOL_SOCKET, socket.SO_REUSEADDR, 1)
        sock.bind(address)
        sock.listen(128)
    except OSError as error:
        sock.close()
        if error.errno == errno.EADDRINUSE:
            raise option_error(f"port {port} on {host} is in use: give another --port (0: any free port)",
                               "--port") from None
        raise option_error(f"cannot serve on {host} port {port}: {error.strerror or error}", "--host") from None
    return sock


def make_server(app):
    """A uvicorn server for `app`, quiet (warnings only), that closes open connections soon after Ctrl-C."""
    import uvicorn

    config = uvicorn.Config(app, log_level="warning", access_log=False, lifespan="off",
                            timeout_graceful_shutdown=GRACEFUL_SHUTDOWN_S, server_header=False)
    return uvicorn.Server(config)


def _open_when_started(server, url):
    for _ in range(400):
        if server.started:
            try:
                webbrowser.open(url)
            except webbrowser.Error:
                pass
            return
        if server.should_exit:
            return
        time.sleep(0.05)


def run_preview(args):
    """``synth preview PATCH [--port N] [--host H] [--no-browser]``: serve the page until Ctrl-C.

    Returns 0 when the server stops by itself; Ctrl-C (or SIGTERM) is raised
    again once the server has shut down, and the command line exits with
    130 (143), as every command does (:mod:`synth.signals`).
    """
    from ..cli import LISTENING_CAUTION

    _require()
    path = Path(args.patch)
    _Preview(path)._base()  # a patch that cannot be read or is invalid: one line, before serving
    sock = bind_socket(args.host, args.port)
    try:
        port = sock.getsockname()[1]
        if not _is_loopback(args.host):
            print(f"synth: warning: --host {args.host}: the page can be reached from the network, and it can "
                  f"write {path.name} and new files beside it", file=sys.stderr)
        server = make_server(create_app(path, host=args.host, port=port))
        url = f"http://{'127.0.0.1' if _is_any(args.host) else _url_host(args.host)}:{port}/"
        print(f"preview of {args.patch} at {url} (Ctrl-C stops)", flush=True)
        print(LISTENING_CAUTION, file=sys.stderr)
        if args.browser:
            threading.Thread(target=_open_when_started, args=(server, url), daemon=True).start()
        server.run(sockets=[sock])
    finally:
        sock.close()
    return 0
