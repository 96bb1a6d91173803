"""Sessions, CSRF tokens and upload checks for the bench page.

Sessions live in the server's memory: the cookie carries a random session id signed with
itsdangerous under a key made at start-up, so a forged or altered cookie is refused and a
restart logs everyone out. Each session has its own CSRF token, compared in constant time.
"""

from __future__ import annotations

import hmac
import re
import secrets
import time
from collections.abc import Callable
from dataclasses import dataclass, field

from itsdangerous import BadSignature, URLSafeSerializer, URLSafeTimedSerializer

COOKIE = "tp_session"
LOGIN_COOKIE = "tp_login"
UPLOAD_TOKEN = re.compile(r"^[0-9a-f]{32}$")
# Photo file names: letters, digits, dot, dash, underscore; no folder, no leading dot.
PHOTO_NAME = re.compile(r"^[A-Za-z0-9_][A-Za-z0-9_.\- ]{0,120}$")


@dataclass
class BenchSession:
    """One logged-in person at one browser."""

    initials: str
    # roles held at login, only to show or hide forms; every act is checked in the store
    # against the roles in force at its own time
    roles: frozenset[str]
    csrf: str = field(default_factory=lambda: secrets.token_urlsafe(32))
    last_seen: float = 0.0


class Sessions:
    """Server-side sessions expiring after ``idle_s`` seconds without a request."""

    def __init__(self, idle_s: float, clock: Callable[[], float] = time.monotonic) -> None:
        self.idle_s, self.clock = idle_s, clock
        self._key = secrets.token_bytes(32)
        self._cookie = URLSafeSerializer(self._key, salt="session")
        self._login = URLSafeTimedSerializer(self._key, salt="login")
        self._by_id: dict[str, BenchSession] = {}

    def open(self, initials: str, roles: frozenset[str]) -> str:
        """A new session; returns the cookie value."""
        now = self.clock()
        for old in [k for k, v in self._by_id.items() if now - v.last_seen > self.idle_s]:
            del self._by_id[old]  # forget sessions that ran out unseen
        sid = secrets.token_urlsafe(32)
        self._by_id[sid] = BenchSession(initials, roles, last_seen=now)
        return self._cookie.dumps(sid)

    def find(self, cookie: str | None) -> BenchSession | None:
        """The live session for a cookie value, or None (unsigned, unknown or expired)."""
        if not cookie:
            return None
        try:
            sid = self._cookie.loads(cookie)
        except BadSignature:
            return None
        found = self._by_id.get(sid) if isinstance(sid, str) else None
        if found is None:
            return None
        now = self.clock()
        if now - found.last_seen > self.idle_s:
            del self._by_id[sid]
            return None
        found.last_seen = now
        return found

    def close(self, cookie: str | None) -> None:
        try:
            sid = self._cookie.loads(cookie or "")
        except BadSignature:
            return
        self._by_id.pop(sid, None)

    def login_token(self) -> tuple[str, str]:
        """(cookie nonce, form token) for the login form, before anyone has a session."""
        nonce = secrets.token_urlsafe(16)
        return nonce, self._login.dumps(nonce)

    def login_token_ok(self, nonce: str | None, token: str | None) -> bool:
        try:
            value = self._login.loads(token or "", max_age=3600)
        except BadSignature:
            return False
        return isinstance(value, str) and bool(nonce) and hmac.compare_digest(value, nonce or "")


def csrf_ok(session: BenchSession, token: object) -> bool:
    """True when a form's token is this session's."""
    return isinstance(token, str) and hmac.compare_digest(token, session.csrf)


def photo_problem(name: str, content: bytes) -> str | None:
    """Why a photo upload is refused, or None: a plain file name, at most 50 MB, an image
    type by its first bytes (the CLI's rule, `domain.observations.photo_type`), and an image
    Pillow opens (HEIC, which Pillow does not read, is taken on its signature)."""
    from testplan.domain.observations import PHOTO_MAX_BYTES, photo_type

    if "/" in name or "\\" in name or ".." in name or not PHOTO_NAME.match(name):
        return "the file name must be a plain name (letters, digits, . - _), no folders"
    if len(content) > PHOTO_MAX_BYTES:
        return "not a photo: more than 50 MB"
    media = photo_type(content[:16])
    if media is None:
        return "not a photo: JPEG, PNG, WebP, TIFF or HEIC expected"
    if media == "image/heic":
        return None
    import io

    from PIL import Image, UnidentifiedImageError

    try:
        with Image.open(io.BytesIO(content)) as img:
            img.verify()
    except (UnidentifiedImageError, OSError, SyntaxError, ValueError):
        return "the photo is damaged or not an image"
    return None
