"""The bench page's routes: read a form, call the store function the CLI calls, render.

A refused act raises TestplanError inside ``store.write``, which rolls the unit back, so
nothing is stored; the page shows the message beside the field it concerns.
"""

from __future__ import annotations

import json
import secrets
import shutil
import tempfile
import threading
import time
from collections.abc import Awaitable, Callable
from pathlib import Path
from typing import TYPE_CHECKING, Any, TypeVar

from starlette.applications import Starlette
from starlette.concurrency import run_in_threadpool
from starlette.datastructures import FormData, UploadFile
from starlette.requests import Request
from starlette.responses import HTMLResponse, RedirectResponse, Response
from starlette.routing import Route

from testplan.errors import TestplanError
from testplan.web import security
from testplan.web.security import BenchSession, Sessions

if TYPE_CHECKING:  # pragma: no cover
    from sqlmodel import Session

    from testplan.store.engine import Store

T = TypeVar("T")
Handler = Callable[[Request, BenchSession], Awaitable[Response]]

# Where a store or CLI error key belongs on the page's forms.
FIELD_OF = {
    "--ambient-temperature": "ambient_temperature",
    "--ambient-humidity": "ambient_humidity",
    "--ambient-pressure": "ambient_pressure",
    "--equipment": "equipment",
    "--state-ok": "checklist",
    "--state-differs": "checklist",
    "--operator": "form",
    "--by": "form",
    "--as": "form",
    "--role": "role",
    "INITIALS": "initials",
    "old_password": "old_password",
    "--map": "map",
    "--tz": "tz",
    "--at": "form",
    "--key": "key",
    "--approved-by": "approver",
    "--reason": "reason",
    "--why": "why",
    "IMPORT": "why",
    "--covers": "covers",
    "key": "key",
    "password": "password",
    "photo": "photo",
    "specimen": "specimen",
}
UPLOAD_CHUNK = 1 << 20
MAX_FORM_FILES = 2


def _field(err: TestplanError) -> str:
    key = err.key or "form"
    if key in FIELD_OF:
        return FIELD_OF[key]
    return key.rpartition(".")[2] or "form"


def _message(err: TestplanError) -> str:
    where = f"line {err.line}: " if err.line else ""
    fix = f" ({err.fix})" if err.fix else ""
    return f"{where}{err.message}{fix}"


class BenchApp:
    """State shared by the routes: the store, sessions, templates and the upload folder."""

    def __init__(
        self,
        store: Store,
        *,
        secure_cookies: bool,
        idle_minutes: float,
        clock: Callable[[], float] = time.monotonic,
        upload_dir: Path | None = None,
    ) -> None:
        from testplan.report.render import environment

        self.store = store
        self.secure = secure_cookies
        self.sessions = Sessions(idle_minutes * 60, clock)
        self.env = environment()
        self.uploads = upload_dir or Path(tempfile.mkdtemp(prefix="testplan-uploads-"))
        sqlite = store.dialect == "sqlite"
        self.write_lock: threading.Lock | None = threading.Lock() if sqlite else None

    # --- plumbing --------------------------------------------------------------------

    def render(
        self, request: Request | None, name: str, context: dict[str, Any], status: int = 200
    ) -> HTMLResponse:
        page = self.env.get_template(f"web/{name}.html.j2").render(
            me=context.pop("me", None), errors=context.pop("errors", {}), **context
        )
        return HTMLResponse(page, status_code=status, headers=_headers())

    def cookie(self, response: Response, name: str, value: str) -> None:
        response.set_cookie(
            name, value, httponly=True, samesite="strict", secure=self.secure, path="/"
        )

    def guarded(self, handler: Handler, *, write: bool) -> Callable[[Request], Awaitable[Response]]:
        """A route that needs a live session, and on POST that session's CSRF token."""

        async def route(request: Request) -> Response:
            me = self.sessions.find(request.cookies.get(security.COOKIE))
            if me is None:
                if request.method == "GET":
                    return RedirectResponse("/login", status_code=303)
                return HTMLResponse("log in first", status_code=403, headers=_headers())
            if write:
                form = await self.form(request)
                if not security.csrf_ok(me, form.get("csrf")):
                    await self.close_form(request)
                    return HTMLResponse("this form has expired; reload the page", status_code=403)
                request.state.form = form
            try:
                return await handler(request, me)
            finally:
                await self.close_form(request)

        return route

    async def close_form(self, request: Request) -> None:
        """Close the spooled upload files of the request's form."""
        form = getattr(request.state, "raw_form", None)
        if form is not None:
            await form.close()

    async def form(self, request: Request) -> FormData:
        if not hasattr(request.state, "form"):
            request.state.form = await request.form(
                max_files=MAX_FORM_FILES, max_fields=400, max_part_size=1 << 20
            )
            request.state.raw_form = request.state.form
        form: FormData = request.state.form
        return form

    def base(self, me: BenchSession, **extra: Any) -> dict[str, Any]:
        return {"me": me, "csrf": me.csrf, **extra}

    # --- login -----------------------------------------------------------------------

    async def login_page(self, request: Request) -> Response:
        return self._login_form(request, {})

    def _login_form(self, request: Request, errors: dict[str, str], status: int = 200) -> Response:
        nonce, token = self.sessions.login_token()
        response = self.render(
            request, "login", {"login_token": token, "errors": errors}, status=status
        )
        self.cookie(response, security.LOGIN_COOKIE, nonce)
        return response

    async def login(self, request: Request) -> Response:
        """The login form's POST; its spooled upload is closed whatever happens."""
        try:
            return await self._login(request)
        finally:
            await self.close_form(request)

    async def _login(self, request: Request) -> Response:
        """Log in by password, or by key file and passphrase when a key file is given."""
        from testplan.keys import load_private_bytes
        from testplan.store import identity, logins
        from testplan.store.tables import Person

        form = await self.form(request)
        if not self.sessions.login_token_ok(
            request.cookies.get(security.LOGIN_COOKIE), _text(form, "csrf")
        ):
            return HTMLResponse("this form has expired; reload the page", status_code=403)
        initials = _text(form, "initials").strip()
        upload = form.get("key_file")
        by_key = isinstance(upload, UploadFile) and bool(upload.filename)
        private = None
        if by_key:
            assert isinstance(upload, UploadFile)
            try:
                data = await upload.read(64 * 1024)
                private = load_private_bytes(data, _text(form, "passphrase"), Path("key file"))
            except TestplanError:
                private = None

        def unit(session: Session) -> tuple[Person | str, frozenset[str]]:
            if by_key:
                got = logins.log_in_with_key(session, initials=initials, key=private)
            else:
                got = logins.log_in(session, initials=initials, password=_text(form, "password"))
            roles = frozenset(identity.roles_of(session, got)) if isinstance(got, Person) else None
            return got, roles or frozenset()

        got, roles = await run_in_threadpool(self.write, unit)
        if isinstance(got, str):
            return self._login_form(request, {"key" if by_key else "password": got}, status=401)
        response = RedirectResponse("/", status_code=303)
        self.cookie(response, security.COOKIE, self.sessions.open(got.initials, roles))
        return response

    async def logout(self, request: Request, me: BenchSession) -> Response:
        self.sessions.close(request.cookies.get(security.COOKIE))
        response = RedirectResponse("/login", status_code=303)
        response.delete_cookie(security.COOKIE, path="/")
        return response

    # --- pages -----------------------------------------------------------------------

    async def today(self, request: Request, me: BenchSession) -> Response:
        from testplan.web import views

        context = await self.read(views.today)
        return self.render(request, "today", self.base(me, **context))

    async def run_page(
        self,
        request: Request,
        me: BenchSession,
        errors: dict[str, str] | None = None,
        status: int = 200,
        notes: list[str] | None = None,
    ) -> Response:
        from testplan.web import views

        key = request.path_params["key"]
        try:
            context = await self.read(lambda session: views.run(session, key))
        except TestplanError as err:
            return self.render(request, "missing", self.base(me, message=_message(err)), 404)
        form = getattr(request.state, "form", None)
        return self.render(
            request,
            "run",
            self.base(me, errors=errors or {}, notes=notes or [], given=_given(form), **context),
            status,
        )

    async def act(
        self, request: Request, unit: Callable[[Session], Any]
    ) -> tuple[Any, dict[str, str]]:
        """Run one unit of work in a worker thread (the event loop goes on serving other
        benches' pages meanwhile); a refusal comes back as {field: message}, nothing stored."""
        try:
            return await run_in_threadpool(self.write, unit), {}
        except TestplanError as err:
            return None, {_field(err): _message(err)}

    def write(self, unit: Callable[[Session], T]) -> T:
        """``store.write`` from a worker thread. On SQLite one writer at a time queues on a
        lock here instead of on the file's busy timeout (its writes queue anyway)."""
        if self.write_lock is None:
            return self.store.write(unit)
        with self.write_lock:
            return self.store.write(unit)

    async def read(self, view: Callable[[Session], T]) -> T:
        """What ``view`` reads from the store, in a worker thread, like ``act``."""

        def run() -> T:
            with self.store.reading() as session:
                return view(session)

        return await run_in_threadpool(run)

    async def start(self, request: Request, me: BenchSession) -> Response:
        from testplan.store import records

        key = request.path_params["key"]
        form = await self.form(request)
        try:
            checklist = await self.read(lambda session: _checklist(session, key))
            sheet = _start_sheet(form, me.initials, checklist)
        except TestplanError as err:
            return await self.run_page(request, me, {_field(err): _message(err)}, 400)

        def unit(session: Session) -> list[str]:
            run = records.find_run(session, key)
            return records.start_run(session, run=run, sheet=sheet)

        warnings, errors = await self.act(request, unit)
        if errors:
            return await self.run_page(request, me, errors, 400)
        return await self.run_page(request, me, notes=["run started", *warnings])

    async def finish(self, request: Request, me: BenchSession) -> Response:
        from testplan.store import records

        key = request.path_params["key"]
        note = _text(request.state.form, "note").strip() or None

        def unit(session: Session) -> None:
            run = records.find_run(session, key)
            records.finish_run(session, run=run, by=me.initials, at=None, note=note)

        _, errors = await self.act(request, unit)
        return await self.run_page(
            request, me, errors, 400 if errors else 200, [] if errors else ["run finished"]
        )

    async def check(self, request: Request, me: BenchSession) -> Response:
        """The data check: a signed act, so it asks for the checker's own key and passphrase.
        Refused, with the criterion named beside the button, while a failed condition is
        neither covered by an approved deviation nor the run invalidated."""
        from testplan.store import judging, records
        from testplan.store.identity import Signer

        key = request.path_params["key"]
        form = request.state.form
        note = _text(form, "note").strip() or None
        try:
            private = await _private_key(form)
        except TestplanError as err:
            return await self.run_page(request, me, {"key": err.message}, 400)

        def unit(session: Session) -> None:
            run = records.find_run(session, key)
            records.check_run(session, run=run, by=Signer(me.initials, private), note=note)
            judging.require_disposition(session, run, actor=me.initials)  # else rolled back

        _, errors = await self.act(request, unit)
        if "RUN" in errors:  # a failed condition not dispositioned: shown at the check
            errors["check"] = errors.pop("RUN")
        return await self.run_page(
            request, me, errors, 400 if errors else 200, [] if errors else ["data checked"]
        )

    async def deviation(self, request: Request, me: BenchSession) -> Response:
        """A deviation, approved on the spot: the approver signs with their own key file."""
        from testplan.store import records
        from testplan.store.identity import Signer

        key = request.path_params["key"]
        form = request.state.form
        approver = _text(form, "approver").strip()
        try:
            private = await _private_key(form, "approver_key", "approver_passphrase")
        except TestplanError as err:
            return await self.run_page(request, me, {"approver_key": err.message}, 400)

        def unit(session: Session) -> None:
            run = records.find_run(session, key)
            records.add_deviation(
                session,
                run=run,
                description=_text(form, "description"),
                reason=_text(form, "reason"),
                approver=Signer(approver, private, option="approver"),
                recorded_by=me.initials,
                covers=_text(form, "covers").strip() or None,
            )

        _, errors = await self.act(request, unit)
        if errors:
            if "key" in errors:  # the approver's key, not the logged-in person's
                errors["approver_key"] = errors.pop("key")
            return await self.run_page(request, me, errors, 400)
        request.state.form = None
        return await self.run_page(
            request, me, notes=[f"deviation recorded, approved by {approver}"]
        )

    # --- logger files ----------------------------------------------------------------

    async def logger_upload(self, request: Request, me: BenchSession) -> Response:
        key = request.path_params["key"]
        form = request.state.form
        upload = form.get("file")
        if not isinstance(upload, UploadFile) or not upload.filename:
            return await self.run_page(request, me, {"file": "choose a logger file"}, 400)
        name = Path(upload.filename.replace("\\", "/")).name or "logger.csv"
        token = secrets.token_hex(16)
        with (self.uploads / token).open("wb") as out:
            while chunk := await upload.read(UPLOAD_CHUNK):
                out.write(chunk)
        options = {k: _text(form, k) for k in READ_FIELDS}
        meta = {"run": key, "name": name, "by": me.initials, "options": options}
        (self.uploads / f"{token}.json").write_text(json.dumps(meta))
        return RedirectResponse(f"/run/{key}/logger/{token}", status_code=303)

    def _upload(self, request: Request, me: BenchSession) -> tuple[Path, dict[str, Any]] | None:
        token = request.path_params["token"]
        if not security.UPLOAD_TOKEN.match(token):
            return None
        path = self.uploads / token
        meta_path = self.uploads / f"{token}.json"
        if not meta_path.is_file():
            return None
        meta: dict[str, Any] = json.loads(meta_path.read_text())
        if meta["run"] != request.path_params["key"] or meta["by"] != me.initials:
            return None
        return path, meta

    async def logger_preview(
        self,
        request: Request,
        me: BenchSession,
        errors: dict[str, str] | None = None,
        status: int = 200,
    ) -> Response:
        from testplan.domain.channels import CHANNELS
        from testplan.importers.logger_csv import preview_logger_bytes
        from testplan.web import views

        found = self._upload(request, me)
        if found is None:
            return self.render(request, "missing", self.base(me, message="no such upload"), 404)
        path, meta = found
        errors = dict(errors or {})
        preview = None
        try:
            preview = await run_in_threadpool(
                preview_logger_bytes,
                _head_of(path),
                meta["name"],
                _read_options(meta["options"], []),
            )
        except TestplanError as err:
            errors["file"] = _message(err)
        equipment, specimens = await self.read(
            lambda s: (views.run_equipment_tags(s, meta["run"]), views.run_serials(s, meta["run"]))
        )
        return self.render(
            request,
            "preview",
            self.base(
                me,
                errors=errors,
                key=meta["run"],
                token=request.path_params["token"],
                name=meta["name"],
                preview=preview,
                channels=list(CHANNELS.values()),
                equipment=equipment,
                specimens=specimens,
                given=_given(getattr(request.state, "form", None)),
            ),
            status,
        )

    async def logger_import(self, request: Request, me: BenchSession) -> Response:
        from testplan.importers.logger_csv import ReadOptions, parse_map, read_logger_bytes
        from testplan.store import imports, records

        found = self._upload(request, me)
        if found is None:
            return self.render(request, "missing", self.base(me, message="no such upload"), 404)
        path, meta = found
        form = request.state.form
        sources = form.getlist("source")
        maps, skipped = [], False
        for i, source in enumerate(sources):
            quantity = _text(form, f"quantity_{i}")
            if not quantity:
                skipped = True
                continue
            unit = _text(form, f"unit_{i}").strip()
            equipment = _text(form, f"equipment_{i}")
            specimen = _text(form, f"specimen_{i}")
            named = f'"{source}"' if any(c in source for c in '[]=@#"') else source
            text = named + (f"[{unit}]" if unit else "") + f"={quantity}"
            text += f"@{equipment}" if equipment else ""
            text += f"#{specimen}" if specimen else ""
            maps.append(text)
        if not maps:
            return await self.logger_preview(request, me, {"map": "pick at least one channel"}, 400)
        try:
            options: ReadOptions = _read_options(meta["options"], [], skipped)
            data = await run_in_threadpool(
                read_logger_bytes,
                path.read_bytes(),
                meta["name"],
                [parse_map(m) for m in maps],
                options,
            )
        except TestplanError as err:
            return await self.logger_preview(request, me, {_field(err): _message(err)}, 400)

        def unit_of_work(session: Session) -> Any:
            run = records.find_run(session, meta["run"])
            return imports.import_logger_data(session, run=run, data=data, by=me.initials)

        raw, errors = await self.act(request, unit_of_work)
        if errors:
            return await self.logger_preview(request, me, errors, 400)
        path.unlink(missing_ok=True)
        (self.uploads / f"{request.path_params['token']}.json").unlink(missing_ok=True)
        request.state.form = None
        return await self.run_page(
            request, me, notes=[f"imported {raw.samples} samples from {raw.name}"]
        )

    # --- observations ----------------------------------------------------------------

    async def withdraw(self, request: Request, me: BenchSession) -> Response:
        """Withdraw a wrong import until the data check, as ``record withdraw`` does."""
        from testplan.store import imports, records

        key = request.path_params["key"]
        form = request.state.form
        import_id, why = _text(form, "import"), _text(form, "why")

        def unit(session: Session) -> None:
            run = records.find_run(session, key)
            imports.withdraw_import(session, run=run, import_id=import_id, why=why, by=me.initials)

        _, errors = await self.act(request, unit)
        return await self.run_page(
            request, me, errors, 400 if errors else 200, [] if errors else ["import withdrawn"]
        )

    async def observe(self, request: Request, me: BenchSession) -> Response:
        from testplan.domain.observations import KINDS, check_entry
        from testplan.store import records

        key = request.path_params["key"]
        form = request.state.form
        kind = _text(form, "kind")
        if kind not in KINDS or kind == "photo":
            return await self.run_page(request, me, {"kind": "pick a kind of observation"}, 400)
        specimen = _text(form, "specimen") or None
        checkpoint = _text(form, "checkpoint").strip() or None
        fields: dict[str, Any] = {}
        for spec in KINDS[kind]:
            raw = _text(form, spec.name).strip()
            if raw == "":
                continue
            if spec.kind == "bool":
                fields[spec.name] = raw == "yes"
            elif spec.kind == "int":
                fields[spec.name] = int(raw) if raw.lstrip("-").isdigit() else raw
            else:
                fields[spec.name] = raw
        items = []
        try:
            entry = check_entry(kind, fields, key=kind, specimen=specimen, checkpoint=checkpoint)
            items.append(
                records.ObservationIn(
                    kind=entry.kind,
                    data=entry.data,
                    specimen=entry.specimen,
                    checkpoint=entry.checkpoint,
                )
            )
            photo = form.get("photo")
            if isinstance(photo, UploadFile) and photo.filename:
                content = await photo.read()
                problem = security.photo_problem(photo.filename, content)
                if problem:
                    return await self.run_page(request, me, {"photo": problem}, 400)
                shot = check_entry(
                    "photo",
                    {"file": photo.filename},
                    key="photo",
                    specimen=specimen,
                    checkpoint=checkpoint,
                )
                items.append(
                    records.ObservationIn(
                        kind="photo",
                        data=shot.data,
                        specimen=shot.specimen,
                        checkpoint=shot.checkpoint,
                        photo_name=photo.filename,
                        photo=content,
                    )
                )
        except TestplanError as err:
            return await self.run_page(request, me, {_field(err): _message(err)}, 400)

        def unit(session: Session) -> int:
            run = records.find_run(session, key)
            return len(records.add_observations(session, run=run, items=items, by=me.initials))

        n, errors = await self.act(request, unit)
        if errors:
            return await self.run_page(request, me, errors, 400)
        request.state.form = None
        return await self.run_page(request, me, notes=[f"{n} observation(s) recorded"])

    # --- sign-off and people -----------------------------------------------------------

    async def page(
        self,
        me: BenchSession,
        name: str,
        read: Callable[[Session], dict[str, Any]],
        errors: dict[str, str] | None,
        status: int,
        notes: list[str] | None,
    ) -> Response:
        """A page read from the store by ``read`` with its errors and notes; a missing
        record named in the path gives the "missing" page (404)."""
        try:
            context = await self.read(read)
        except TestplanError as err:
            return self.render(None, "missing", self.base(me, message=_message(err)), 404)
        extra = {"errors": errors or {}, "notes": notes or []}
        return self.render(None, name, self.base(me, **extra, **context), status)

    async def signoff_page(
        self,
        request: Request,
        me: BenchSession,
        errors: dict[str, str] | None = None,
        status: int = 200,
        notes: list[str] | None = None,
    ) -> Response:
        from testplan.web import views

        ref = request.path_params["ref"]
        return await self.page(
            me, "signoff", lambda s: views.signoff(s, ref), errors, status, notes
        )

    async def sign(self, request: Request, me: BenchSession) -> Response:
        """Sign the campaign in a role, as ``testplan sign`` does: the logged-in person's own
        key and passphrase, given now and used only in memory; roles as granted now."""
        from testplan import __version__
        from testplan.report.render import templates_sha256
        from testplan.store import signoff
        from testplan.store.identity import Signer

        ref = request.path_params["ref"]
        form = request.state.form
        role = _text(form, "role")
        try:
            private = await _private_key(form)
        except TestplanError as err:
            return await self.signoff_page(request, me, {"key": err.message}, 400)
        printing = {"tool_version": __version__, "templates_sha256": templates_sha256()}

        def unit(session: Session) -> Any:
            signer = Signer(me.initials, private, option="--as")
            return signoff.sign(session, campaign=ref, role=role, signer=signer, printing=printing)

        done, errors = await self.act(request, unit)
        if errors:
            return await self.signoff_page(request, me, errors, 400)
        locked = "; the campaign is now locked" if done.role == "approved" else ""
        said = f"{done.role} by {done.initials}, manifest root {done.root}{locked}"
        return await self.signoff_page(request, me, notes=[said])

    async def people_page(
        self,
        request: Request,
        me: BenchSession,
        errors: dict[str, str] | None = None,
        status: int = 200,
        notes: list[str] | None = None,
    ) -> Response:
        from testplan.web import views

        return await self.page(me, "people", views.people, errors, status, notes)

    async def set_password(self, request: Request, me: BenchSession) -> Response:
        """Set a person's password, as ``people password`` does: signed with the logged-in
        manager's own key and passphrase, given now."""
        from testplan.store import logins
        from testplan.store.identity import Signer

        form = request.state.form
        initials, password = _text(form, "initials"), _text(form, "password")
        if password != _text(form, "password_again"):
            return await self.people_page(
                request, me, {"password": "the two passwords differ"}, 400
            )
        try:
            private = await _private_key(form)
        except TestplanError as err:
            return await self.people_page(request, me, {"key": err.message}, 400)

        def unit(session: Session) -> Any:
            signer = Signer(me.initials, private)
            return logins.set_password(session, initials=initials, password=password, by=signer)

        person, errors = await self.act(request, unit)
        if errors:
            return await self.people_page(request, me, errors, 400)
        return await self.people_page(
            request, me, notes=[f"{person.initials}: password set, signed by {me.initials}"]
        )

    async def own_password(self, request: Request, me: BenchSession) -> Response:
        """Change one's own password: the present one, and one's own key and passphrase."""
        from testplan.store import logins
        from testplan.store.identity import Signer

        form = request.state.form
        new = _text(form, "new_password")
        if new != _text(form, "new_password_again"):
            return await self.people_page(
                request, me, {"new_password": "the two passwords differ"}, 400
            )
        try:
            private = await _private_key(form, "own_key_file", "own_passphrase")
        except TestplanError as err:
            return await self.people_page(request, me, {"own_key": err.message}, 400)

        def unit(session: Session) -> Any:
            old = _text(form, "old_password")
            return logins.change_own_password(
                session, signer=Signer(me.initials, private), old=old, new=new
            )

        _, errors = await self.act(request, unit)
        if errors:
            for mine, field in (("password", "new_password"), ("key", "own_key")):
                if mine in errors:
                    errors[field] = errors.pop(mine)
            return await self.people_page(request, me, errors, 400)
        return await self.people_page(request, me, notes=["your password is changed"])

    # --- results and live ------------------------------------------------------------

    async def results(self, request: Request, me: BenchSession) -> Response:
        from testplan.web import views

        key = request.path_params["key"]
        try:
            context = await self.read(lambda session: views.results(session, key))
        except TestplanError as err:
            return self.render(request, "missing", self.base(me, message=_message(err)), 404)
        return self.render(request, "results", self.base(me, **context))

    async def live(self, request: Request, me: BenchSession) -> Response:
        from testplan.web import views

        key = request.path_params["key"]
        try:
            context = await self.read(lambda session: views.live(session, key))
        except TestplanError as err:
            return self.render(request, "missing", self.base(me, message=_message(err)), 404)
        return self.render(request, "live", self.base(me, **context))


READ_FIELDS = ("layout", "tz", "delimiter", "decimal", "encoding", "skip_lines")


PREVIEW_BYTES = 1 << 20


def _checklist(session: Session, key: str) -> list[str]:
    from testplan.store import records

    run = records.find_run(session, key)
    return list(records.run_procedure(session, run).get("specimen_state", []))


def _head_of(path: Path) -> bytes:
    """The first whole lines of an uploaded file (at most PREVIEW_BYTES): the preview never
    reads a large log whole."""
    with path.open("rb") as f:
        head = f.read(PREVIEW_BYTES)
    if len(head) == PREVIEW_BYTES and b"\n" in head:
        head = head[: head.rindex(b"\n") + 1]
    return head


def _read_options(given: dict[str, str], _maps: list[str], skip_unmapped: bool = False) -> Any:
    from testplan.errors import LoggerFileError
    from testplan.importers.logger_csv import ReadOptions

    skip = given.get("skip_lines", "").strip()
    if skip and not skip.isdigit():
        raise LoggerFileError(f"cannot read {skip!r} as a number of lines", key="skip_lines")
    return ReadOptions(
        layout=given.get("layout") or "auto",  # type: ignore[arg-type]  # checked by the reader
        timezone=given.get("tz") or None,
        delimiter=given.get("delimiter") or "auto",
        decimal=given.get("decimal") or "auto",
        encoding=given.get("encoding") or "auto",
        skip_lines=int(skip) if skip else None,
        skip_unmapped=skip_unmapped,
    )


def _start_sheet(form: FormData, operator: str, checklist: list[str]) -> Any:
    """The StartSheet the CLI's ``record start`` would build from the same answers."""
    from testplan.domain.units import parse_quantity
    from testplan.store.records import StartSheet

    def quantity(name: str, kind: str, unit: str) -> float:
        text = _text(form, name).strip()
        if text and text.replace(".", "", 1).replace("-", "", 1).isdigit():
            text = f"{text} {unit}"
        return parse_quantity(text, kind, unit, key=f"--{name.replace('_', '-')}")

    notes = []
    all_confirmed = True
    for i in range(1, len(checklist) + 1):
        if _text(form, f"item_{i}") == "ok":
            continue
        how = _text(form, f"differs_{i}").strip()
        if how:
            notes.append((i, how))
        else:
            all_confirmed = False
    return StartSheet(
        operator=operator,
        equipment=tuple(str(v) for v in form.getlist("equipment")),
        ambient_temperature_c=quantity("ambient_temperature", "temperature", "degC"),
        ambient_humidity_pct=quantity("ambient_humidity", "ratio", "%"),
        ambient_pressure_hpa=quantity("ambient_pressure", "pressure", "hPa"),
        state_ok=all_confirmed,
        state_notes=tuple(notes),
        preconditioning=_text(form, "precondition").strip() or None,
    )


async def _private_key(form: FormData, field: str = "key_file", phrase: str = "passphrase") -> Any:
    """The private key uploaded in ``field``, opened in memory with the passphrase in
    ``phrase`` (never written anywhere). Raises TestplanError (key "key") when no file was
    chosen or it does not open."""
    from testplan.keys import load_private_bytes

    upload = form.get(field)
    if not isinstance(upload, UploadFile) or not upload.filename:
        raise TestplanError("choose your key file", key="key")
    data = await upload.read(64 * 1024)
    try:
        return load_private_bytes(data, _text(form, phrase), Path("key file"))
    except TestplanError as err:
        raise TestplanError(_message(err), key="key") from None


def _text(form: FormData | None, name: str) -> str:
    value = form.get(name) if form is not None else None
    return value if isinstance(value, str) else ""


def _given(form: FormData | None) -> dict[str, str]:
    """What the person typed, to fill the form again after a refusal."""
    if form is None:
        return {}
    return {k: v for k, v in form.multi_items() if isinstance(v, str) and k != "csrf"}


def _headers() -> dict[str, str]:
    return {
        "Content-Security-Policy": "default-src 'self'; img-src 'self' data:; "
        "style-src 'self' 'unsafe-inline'; frame-ancestors 'none'; form-action 'self'",
        "X-Content-Type-Options": "nosniff",
        "Referrer-Policy": "no-referrer",
        "Cache-Control": "no-store",
    }


def make_app(
    store: Store,
    *,
    secure_cookies: bool = False,
    idle_minutes: float = 30,
    clock: Callable[[], float] = time.monotonic,
    upload_dir: Path | None = None,
) -> Starlette:
    """The bench page as an ASGI app over ``store``."""
    bench = BenchApp(
        store,
        secure_cookies=secure_cookies,
        idle_minutes=idle_minutes,
        clock=clock,
        upload_dir=upload_dir,
    )
    g = bench.guarded
    routes = [
        Route("/login", bench.login_page, methods=["GET"]),
        Route("/login", bench.login, methods=["POST"]),
        Route("/logout", g(bench.logout, write=True), methods=["POST"]),
        Route("/", g(bench.today, write=False), methods=["GET"]),
        Route("/run/{key}", g(bench.run_page, write=False), methods=["GET"]),
        Route("/run/{key}/start", g(bench.start, write=True), methods=["POST"]),
        Route("/run/{key}/finish", g(bench.finish, write=True), methods=["POST"]),
        Route("/run/{key}/check", g(bench.check, write=True), methods=["POST"]),
        Route("/run/{key}/deviation", g(bench.deviation, write=True), methods=["POST"]),
        Route("/run/{key}/observe", g(bench.observe, write=True), methods=["POST"]),
        Route("/run/{key}/withdraw", g(bench.withdraw, write=True), methods=["POST"]),
        Route("/run/{key}/logger", g(bench.logger_upload, write=True), methods=["POST"]),
        Route("/run/{key}/logger/{token}", g(bench.logger_preview, write=False), methods=["GET"]),
        Route("/run/{key}/logger/{token}", g(bench.logger_import, write=True), methods=["POST"]),
        Route("/run/{key}/results", g(bench.results, write=False), methods=["GET"]),
        Route("/run/{key}/live", g(bench.live, write=False), methods=["GET"]),
        Route("/campaign/{ref}/signoff", g(bench.signoff_page, write=False), methods=["GET"]),
        Route("/campaign/{ref}/signoff", g(bench.sign, write=True), methods=["POST"]),
        Route("/people", g(bench.people_page, write=False), methods=["GET"]),
        Route("/people/password", g(bench.set_password, write=True), methods=["POST"]),
        Route("/people/own-password", g(bench.own_password, write=True), methods=["POST"]),
    ]
    app = Starlette(routes=routes)
    app.state.bench = bench
    return app


def remove_uploads(app: Starlette) -> None:
    """Delete the upload folder (tests and shutdown)."""
    shutil.rmtree(app.state.bench.uploads, ignore_errors=True)
