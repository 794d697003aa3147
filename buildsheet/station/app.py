"""The station's web application (Starlette): routes, forms, cookies, limits.

Pages: ``/e/<element ID>`` (the element page a winder label's QR opens, also as ``/E/`` with
the ID in capitals; leg IDs and other cases redirect to the element's own address),
``/board`` (the day board, refreshing itself), ``/organiser`` (PIN-protected actions).
Every POST goes through :func:`_handle_form`: CSRF token, field limits, the CLI's validation,
one store write, one answer. Request bodies are capped at :data:`MAX_BODY_BYTES`.

Where the work runs: an element page and a typed reading or trim are short SQLite work (well
under a millisecond against the per-thread store of :class:`ledger_api.StorePool`), done on
the event loop; handing them to a worker thread and back cost more than the work itself once
fifty phones post at once (bench/station.py on the 2-core machine, side by side: p95 of a
reading 115-180 ms through the thread pool, 30-65 ms on the loop). Slow work stays in the
thread pool:
sweep files (parsed and analysed), calibration fits, the day board over every element, the
labels-to-reprint comparison, sweep plots. A write on the loop waits only for the station's
own short writes or for another process's (the CLI) write transaction, itself a single short
transaction; WAL readers never wait for writers.
"""

from __future__ import annotations

import threading
import time
import urllib.parse
from collections.abc import Awaitable, Callable, MutableMapping
from dataclasses import dataclass, field
from typing import Any

from starlette.applications import Starlette
from starlette.concurrency import run_in_threadpool
from starlette.datastructures import UploadFile
from starlette.requests import Request
from starlette.responses import HTMLResponse, PlainTextResponse, RedirectResponse, Response
from starlette.routing import Route

from buildsheet.calc.sweep import MAX_SWEEP_BYTES, Sweep, SweepFit
from buildsheet.errors import BuildsheetError
from buildsheet.station import ledger_api as api
from buildsheet.station import security as sec
from buildsheet.station import views

#: Largest request body accepted, bytes: one sweep file plus the form fields around it.
MAX_BODY_BYTES = MAX_SWEEP_BYTES + 64 * 1024
#: Longest free-text field (a note) kept, characters; longer text is refused.
MAX_TEXT = 500
#: The station's page templates.
STATION_TEMPLATES = ("station_element.html", "station_board.html", "station_board_rows.html",
                     "station_message.html", "station_organiser.html")
#: How often the day board refreshes itself, seconds.
BOARD_REFRESH_S = 10

SECURITY_HEADERS = {
    "Content-Security-Policy": ("default-src 'none'; style-src 'unsafe-inline'; img-src 'self'; "
                                "script-src 'self'; connect-src 'self'; form-action 'self'; "
                                "frame-ancestors 'none'; base-uri 'none'"),
    "X-Content-Type-Options": "nosniff",
    "Referrer-Policy": "no-referrer",
    "Cache-Control": "no-store",
}

BOARD_JS = f"""// Day board: fetch the table every {BOARD_REFRESH_S} s and swap it in (no framework).
(function () {{
  var box = document.getElementById("board");
  if (!box) {{ return; }}
  function refresh() {{
    fetch("/board/rows", {{cache: "no-store", credentials: "same-origin"}})
      .then(function (r) {{ return r.ok ? r.text() : Promise.reject(r.status); }})
      .then(function (html) {{ box.innerHTML = html; box.dataset.updated = Date.now(); }})
      .catch(function () {{ /* the station may be restarting: try again next time */ }});
  }}
  setInterval(refresh, {BOARD_REFRESH_S * 1000});
}})();
"""


@dataclass
class StationState:
    """What the running app holds: the station (replaced after a calibration), the keys, the
    template environment and the wrong-PIN counters per browser."""

    station: api.Station
    keys: sec.Keys
    env: Any
    pin_failures: dict[str, tuple[int, float]] = field(default_factory=dict)
    calibrating: threading.Lock = field(default_factory=threading.Lock)


class BodyLimit:
    """ASGI middleware: refuse request bodies over ``limit`` bytes with 413 (declared or
    streamed)."""

    def __init__(self, app: Callable[..., Awaitable[None]], limit: int):
        self.app, self.limit = app, limit

    async def __call__(self, scope: MutableMapping[str, Any], receive: Callable[..., Any],
                       send: Callable[..., Any]) -> None:
        if scope["type"] != "http":
            await self.app(scope, receive, send)
            return
        declared = dict(scope.get("headers") or []).get(b"content-length")
        if declared is not None and (not declared.isdigit() or int(declared) > self.limit):
            await _too_large(self.limit)(scope, receive, send)
            return
        seen = 0

        async def limited() -> Any:
            nonlocal seen
            message = await receive()
            if message["type"] == "http.request":
                seen += len(message.get("body", b""))
                if seen > self.limit:
                    raise _TooLarge
            return message

        try:
            await self.app(scope, limited, send)
        except _TooLarge:
            await _too_large(self.limit)(scope, receive, send)


class _TooLarge(Exception):
    pass


def _too_large(limit: int) -> Response:
    return PlainTextResponse(f"upload refused: more than {limit:,} bytes (a sweep file may be "
                             f"at most {MAX_SWEEP_BYTES:,} bytes)", status_code=413)


# --------------------------------------------------------------------------- helpers


def _state(request: Request) -> StationState:
    return request.app.state.station_state


def _client(request: Request) -> tuple[str, bool]:
    """The browser's client ID from its cookie, or a new one (True when new)."""
    found = request.cookies.get(sec.CLIENT_COOKIE, "")
    if len(found) == 32 and all(c in "0123456789abcdef" for c in found):
        return found, False
    return sec.new_client_id(), True


def _finish(response: Response, client: str, new: bool) -> Response:
    for name, value in SECURITY_HEADERS.items():
        response.headers[name] = value
    if new:
        response.set_cookie(sec.CLIENT_COOKIE, client, httponly=True, samesite="strict",
                            max_age=7 * 24 * 3600)
    return response


def _page(request: Request, template: str, page: Any, status: int = 200,
          client: tuple[str, bool] | None = None) -> Response:
    cid, new = client or _client(request)
    html = _state(request).env.get_template(template).render(page=page)
    return _finish(HTMLResponse(html, status_code=status), cid, new)


def _message(request: Request, title: str, text: str, status: int) -> Response:
    page = {"title": title, "text": text, "event": _state(request).station.spec.event.name}
    return _page(request, "station_message.html", page, status)


def _one_line(exc: BuildsheetError) -> str:
    return "; ".join(p.message if p.where in ("buildsheet",) else str(p) for p in exc.problems)


async def _form(request: Request) -> tuple[dict[str, Any], str, bool] | Response:
    """The posted form with its CSRF token checked, or the refusal to send."""
    cid, new = _client(request)
    try:
        form = await request.form(max_files=1, max_fields=40, max_part_size=MAX_SWEEP_BYTES)
    except Exception:  # noqa: BLE001 - python-multipart raises several types for bad bodies
        return _message(request, "Form not readable", "The form could not be read; reload the "
                        "page and try again.", 400)
    fields: dict[str, Any] = {}
    for key, value in form.multi_items():
        if isinstance(value, UploadFile):
            fields[key] = value
        elif key in fields:
            fields[key] = [*fields[key], value] if isinstance(fields[key], list) else [
                fields[key], value]
        else:
            fields[key] = value
    token = fields.get(sec.CSRF_FIELD)
    if new or not isinstance(token, str) or not sec.csrf_ok(_state(request).keys.secret, cid,
                                                            token):
        await form.close()
        return _message(request, "Form refused", "This form did not come from this station's "
                        "page in this browser (missing or wrong security token). Reload the "
                        "page and send it again.", 403)
    for key, value in fields.items():
        if isinstance(value, str) and len(value) > MAX_TEXT:
            await form.close()
            return _message(request, "Form refused", f"The field {key!r} is longer than "
                            f"{MAX_TEXT} characters.", 400)
    return fields, cid, new


def _text(fields: dict[str, Any], key: str) -> str:
    value = fields.get(key, "")
    return value if isinstance(value, str) else ""


def _csrf(request: Request) -> tuple[str, tuple[str, bool]]:
    client = _client(request)
    return sec.csrf_token(_state(request).keys.secret, client[0]), client


# --------------------------------------------------------------------------- forms


class Refused(Exception):
    """A form turned down with a message and an HTTP status (wrong PIN, lockout)."""

    def __init__(self, message: str, status: int = 400):
        super().__init__(message)
        self.message, self.status = message, status


#: A form's work: (state, fields, client ID) -> the URL to send the browser to, or a finished
#: response (one that sets a cookie). It validates through :mod:`ledger_api` (the CLI's
#: parsers and messages) and makes at most one store write; BuildsheetError or Refused when
#: the input is turned down.
FormWork = Callable[[StationState, dict[str, Any], str], "str | Response"]
#: How a form answers a refusal: (request, message, status, fields, client) -> response.
ErrorAnswer = Callable[[Request, str, int, dict[str, Any], tuple[str, bool]],
                       Awaitable[Response]]


async def _handle_form(request: Request, work: FormWork, answer_error: ErrorAnswer, *,
                       organiser: bool = False, slow: bool = False) -> Response:
    """The one path of every POST: read the form (size and field limits) and check its CSRF
    token (:func:`_form`), check the organiser session when asked, run ``work`` and answer
    with a 303 to where it leads, or ``answer_error`` with the one-line message.

    ``work`` runs on the event loop unless ``slow``: a reading or a trim is a sub-millisecond
    SQLite transaction, cheaper than the hop to a worker thread and back (under fifty phones
    that hop, not the store, was most of a reading's latency; bench/station.py). Slow work
    (parsing a sweep file, fitting a calibration) goes to the thread pool."""
    got = await _form(request)
    if isinstance(got, Response):
        return got
    fields, cid, new = got
    st = _state(request)
    try:
        if organiser and not _is_organiser(request):
            return _message(request, "Organiser only", "Sign in with the organiser PIN first.",
                            403)
        try:
            result = await run_in_threadpool(work, st, fields, cid) if slow else work(
                st, fields, cid)
        except Refused as exc:
            return await answer_error(request, exc.message, exc.status, fields, (cid, new))
        except BuildsheetError as exc:
            return await answer_error(request, _one_line(exc), 400, fields, (cid, new))
    finally:
        for value in fields.values():
            if isinstance(value, UploadFile):
                await value.close()
    response = result if isinstance(result, Response) else RedirectResponse(result, 303)
    return _finish(response, cid, new)


# --------------------------------------------------------------------------- element page


def _element_response(st: StationState, element_id: str, client: tuple[str, bool], *,
                      status: int = 200, error: str = "", notice: str = "",
                      form: dict[str, str] | None = None) -> Response:
    """The element page (store read and template on the event loop: about a millisecond)."""
    cid, new = client
    facts = api.element_facts(st.station, element_id)
    page = views.element_page(facts, st.station.spec.event.units, st.station.spec.event.name,
                              sec.csrf_token(st.keys.secret, cid), error=error, notice=notice,
                              form=form)
    html = st.env.get_template("station_element.html").render(page=page)
    return _finish(HTMLResponse(html, status_code=status), cid, new)


async def element(request: Request) -> Response:
    wanted = request.path_params["element_id"]
    st = _state(request)
    notice = ""
    if request.query_params.get("reading", "").isdigit():
        notice = f"Reading {request.query_params['reading']} recorded."
    elif request.query_params.get("trim", "").isdigit():
        notice = f"Trim {request.query_params['trim']} recorded."
    client = _client(request)
    try:
        element_id = api.resolve(st.station, wanted)
        if element_id != wanted:
            return _finish(RedirectResponse(views.element_url(element_id), status_code=303),
                           *client)
        return _element_response(st, element_id, client, notice=notice)
    except BuildsheetError as exc:
        return _message(request, "Unknown element", _one_line(exc), 404)


def _element_error(element_id: str, keep: tuple[str, ...]) -> ErrorAnswer:
    """Answer a refused element form: the page again with the message and the typed fields."""

    async def answer(request: Request, message: str, status: int, fields: dict[str, Any],
                     client: tuple[str, bool]) -> Response:
        try:
            return _element_response(_state(request), element_id, client, status=status,
                                     error=message, form={k: _text(fields, k) for k in keep})
        except BuildsheetError as missing:
            return _message(request, "Unknown element", _one_line(missing), 404)

    return answer


def _element_form(request: Request, record: Callable[[api.Station, str, dict[str, Any]], int],
                  done: str, keep: tuple[str, ...], *, slow: bool = False) -> Awaitable[Response]:
    """An element page form: ``record`` validates and stores one reading or trim and returns
    its number; the browser goes back to the page, the answer in large type."""
    element_id = request.path_params["element_id"]

    def work(st: StationState, fields: dict[str, Any], _cid: str) -> str:
        number = record(st.station, element_id, fields)
        return f"{views.element_url(element_id)}?{done}={number}#advice"

    return _handle_form(request, work, _element_error(element_id, keep), slow=slow)


async def post_dip(request: Request) -> Response:
    def record(station: api.Station, element_id: str, f: dict[str, Any]) -> int:
        return api.record_dip(station, element_id, _text(f, "dip"), _text(f, "swr"),
                              _text(f, "r"), _text(f, "x"), _text(f, "note"))

    return await _element_form(request, record, "reading", ("dip", "swr", "r", "x", "note"))


async def post_sweep(request: Request) -> Response:
    def record(station: api.Station, element_id: str, f: dict[str, Any]) -> int:
        upload = f.get("sweep")
        if not isinstance(upload, UploadFile) or not upload.filename:
            raise BuildsheetError("choose a sweep file (.s1p or .csv) first")
        upload.file.seek(0)
        data = upload.file.read(MAX_SWEEP_BYTES + 1)  # one byte over: read_sweep says too large
        name = upload.filename.replace("\\", "/").rsplit("/", 1)[-1]
        return api.record_sweep(station, element_id, name, data, _text(f, "note"))

    return await _element_form(request, record, "reading", ("note",), slow=True)


async def post_trim(request: Request) -> Response:
    def record(station: api.Station, element_id: str, f: dict[str, Any]) -> int:
        return api.record_trim(station, element_id, _text(f, "amount"),
                               _text(f, "direction") or "removed",  # type: ignore[arg-type]
                               _text(f, "leg") or "both", _text(f, "note"))

    return await _element_form(request, record, "trim", ("amount", "direction", "leg", "note"))


async def sweep_plot(request: Request) -> Response:
    from buildsheet.station.plot import sweep_svg

    st = _state(request)
    number = request.path_params["number"]

    def work() -> tuple[api.ElementFacts, tuple[Sweep, SweepFit] | None]:
        facts = api.element_facts(st.station, request.path_params["element_id"])
        known = any(m.id == number for m in facts.readings)
        return facts, api.stored_sweep(st.station, facts.element_id, number) if known else None

    try:
        facts, found = await run_in_threadpool(work)
    except BuildsheetError as exc:
        return _message(request, "Unknown element", _one_line(exc), 404)
    if not any(m.id == number for m in facts.readings):
        return _message(request, "No such sweep", f"{facts.element_id} has no reading {number}.",
                        404)
    if found is None:
        return _message(request, "No sweep", f"Reading {number} has no sweep stored.", 404)
    sweep, fit = found
    svg = sweep_svg(sweep, fit, facts.band_low_hz, facts.band_high_hz, facts.design_hz,
                    title=f"{facts.element_id} reading {number}")
    return _finish(Response(svg, media_type="image/svg+xml"), *_client(request))


# --------------------------------------------------------------------------- day board


def _is_organiser(request: Request) -> bool:
    cid, _new = _client(request)
    return sec.organiser_ok(_state(request).keys.secret, cid,
                            request.cookies.get(sec.ORGANISER_COOKIE))


async def _board_page(request: Request) -> tuple[views.BoardPage, tuple[str, bool]]:
    st = _state(request)
    token, client = _csrf(request)
    facts = await run_in_threadpool(api.board_facts, st.station)
    return views.board_page(facts, st.station.spec.event.units, st.station.spec.event.name,
                            token, _is_organiser(request)), client


async def board(request: Request) -> Response:
    page, client = await _board_page(request)
    return _page(request, "station_board.html", page, client=client)


async def board_rows(request: Request) -> Response:
    page, client = await _board_page(request)
    return _page(request, "station_board_rows.html", page, client=client)


async def board_js(request: Request) -> Response:
    return Response(BOARD_JS, media_type="text/javascript",
                    headers={"X-Content-Type-Options": "nosniff"})


#: Longest text the lookup box takes (a label's ID or its whole link).
FIND_MAX_CHARS = 300


async def find(request: Request) -> Response:
    """The board's lookup box: a leg or element ID typed, or read by a barcode scanner (which
    types what it reads), or a label's whole link; answers with the element page."""
    text = request.query_params.get("id", "").strip()[:FIND_MAX_CHARS]
    if "/" in text:  # a link label's address: its last path segment names the element
        last = text.split("?")[0].split("#")[0].rstrip("/").rsplit("/", 1)[-1]
        text = urllib.parse.unquote(last).removesuffix(".html")
    client = _client(request)
    if not text:
        return _finish(RedirectResponse("/board", status_code=303), *client)
    try:
        element_id = await run_in_threadpool(api.resolve, _state(request).station, text)
    except BuildsheetError as exc:
        return _message(request, "Unknown element", _one_line(exc), 404)
    return _finish(RedirectResponse(views.element_url(element_id), status_code=303), *client)


async def home(request: Request) -> Response:
    return RedirectResponse("/board", status_code=303)


# --------------------------------------------------------------------------- organiser


async def _organiser_page(request: Request, *, error: str = "", notice: str = "",
                          status: int = 200) -> Response:
    st = _state(request)
    token, client = _csrf(request)
    if not _is_organiser(request):
        page = views.OrganiserPage(st.station.spec.event.name, token, False, error=error)
        return _page(request, "station_organiser.html", page, status, client)

    def work() -> tuple[api.BoardFacts, tuple[str, ...] | None]:
        return api.board_facts(st.station), api.labels_to_reprint(st.station)

    facts, reprint = await run_in_threadpool(work)
    board_view = views.board_page(facts, st.station.spec.event.units, "", token, True)
    legs = None if reprint is None else tuple(
        (leg, views.element_url(leg.rsplit("-", 1)[0])) for leg in reprint)
    page = views.OrganiserPage(st.station.spec.event.name, token, True, board_view.offers,
                               legs, error, notice)
    return _page(request, "station_organiser.html", page, status, client)


async def _organiser_error(request: Request, message: str, status: int, _fields: dict[str, Any],
                           _client_id: tuple[str, bool]) -> Response:
    return await _organiser_page(request, error=message, status=status)


async def organiser(request: Request) -> Response:
    notice = request.query_params.get("done", "")
    known = {"calibrated": "Calibration stored; cut lengths and batch trims updated.",
             "signed-in": "Signed in as organiser.",
             "voided": "Reading voided: it stays in the history, struck through, and no "
                       "longer counts."}
    return await _organiser_page(request, notice=known.get(notice, ""))


async def organiser_pin(request: Request) -> Response:
    def work(st: StationState, fields: dict[str, Any], cid: str) -> Response:
        count, since = st.pin_failures.get(cid, (0, 0.0))
        if count >= sec.PIN_ATTEMPTS and time.monotonic() - since < sec.PIN_LOCKOUT_S:
            raise Refused("Too many wrong PINs from this browser: wait "
                          f"{sec.PIN_LOCKOUT_S:.0f} s.", 429)
        if not sec.pin_ok(st.keys.pin, _text(fields, "pin")):
            st.pin_failures[cid] = (count + 1 if count < sec.PIN_ATTEMPTS else 1,
                                    time.monotonic())
            raise Refused("Wrong PIN. The PIN is printed on the organiser's cover page of the "
                          "sheets.", 403)
        st.pin_failures.pop(cid, None)
        response = RedirectResponse("/organiser?done=signed-in", status_code=303)
        response.set_cookie(sec.ORGANISER_COOKIE, sec.organiser_token(st.keys.secret, cid),
                            httponly=True, samesite="strict", max_age=12 * 3600)
        return response

    return await _handle_form(request, work, _organiser_error)


async def organiser_calibrate(request: Request) -> Response:
    def work(st: StationState, fields: dict[str, Any], _cid: str) -> str:
        sources = fields.get("source", [])
        sources = [sources] if isinstance(sources, str) else [
            s for s in sources if isinstance(s, str)]
        with st.calibrating:  # one fit at a time; the station is swapped when it is stored
            st.station = api.calibrate(st.station, _text(fields, "design"), sources)
        return "/organiser?done=calibrated"

    return await _handle_form(request, work, _organiser_error, organiser=True, slow=True)


async def organiser_void(request: Request) -> Response:
    def work(st: StationState, fields: dict[str, Any], _cid: str) -> str:
        element_id = api.resolve(st.station, _text(fields, "element"))
        api.void_reading(st.station, element_id, _text(fields, "number"),
                         _text(fields, "reason"))
        return "/organiser?done=voided"

    return await _handle_form(request, work, _organiser_error, organiser=True)


async def organiser_signout(request: Request) -> Response:
    def work(_st: StationState, _fields: dict[str, Any], _cid: str) -> Response:
        response = RedirectResponse("/board", status_code=303)
        response.delete_cookie(sec.ORGANISER_COOKIE)
        return response

    return await _handle_form(request, work, _organiser_error)


# --------------------------------------------------------------------------- the app


def make_app(station: api.Station, keys: sec.Keys | None = None) -> Any:
    """The ASGI application for ``station`` (body limit outside, Starlette inside)."""
    from buildsheet.render.site import environment

    routes = [
        Route("/", home),
        Route("/board", board),
        Route("/board/rows", board_rows),
        Route("/board.js", board_js),
        Route("/find", find),
        Route("/e/{element_id}", element),
        Route("/E/{element_id}", element),  # a link label's QR code, in capitals
        Route("/e/{element_id}/dip", post_dip, methods=["POST"]),
        Route("/e/{element_id}/sweep", post_sweep, methods=["POST"]),
        Route("/e/{element_id}/trim", post_trim, methods=["POST"]),
        Route("/e/{element_id}/sweep/{number:int}.svg", sweep_plot),
        Route("/organiser", organiser),
        Route("/organiser/pin", organiser_pin, methods=["POST"]),
        Route("/organiser/calibrate", organiser_calibrate, methods=["POST"]),
        Route("/organiser/void", organiser_void, methods=["POST"]),
        Route("/organiser/signout", organiser_signout, methods=["POST"]),
    ]
    app = Starlette(routes=routes)
    env = environment()
    env.auto_reload = False  # the shipped templates do not change during a run: no stat per page
    for name in STATION_TEMPLATES:  # compiled now, not while the first phones wait
        env.get_template(name)
    app.state.station_state = StationState(station, keys or sec.Keys(sec.new_secret(),
                                                                     station.pin), env)
    return BodyLimit(app, MAX_BODY_BYTES)

