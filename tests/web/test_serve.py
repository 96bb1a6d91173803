"""`testplan serve` as a process: plain HTTP on loopback, and TLS with Secure cookies."""

from __future__ import annotations

import datetime as dt
import ssl
import subprocess
import sys
import time
from collections.abc import Iterator
from contextlib import contextmanager
from pathlib import Path

from tests.store.conftest import Bench
from tests.web.test_browser import free_port

TESTPLAN = str(Path(sys.executable).parent / "testplan")


def self_signed(folder: Path) -> tuple[Path, Path]:
    """A throwaway certificate for 127.0.0.1 and its key (PEM files)."""
    import ipaddress

    from cryptography import x509
    from cryptography.hazmat.primitives import hashes, serialization
    from cryptography.hazmat.primitives.asymmetric import ec
    from cryptography.x509.oid import NameOID

    key = ec.generate_private_key(ec.SECP256R1())
    name = x509.Name([x509.NameAttribute(NameOID.COMMON_NAME, "bench test")])
    now = dt.datetime.now(dt.UTC)
    cert = (
        x509.CertificateBuilder()
        .subject_name(name)
        .issuer_name(name)
        .public_key(key.public_key())
        .serial_number(x509.random_serial_number())
        .not_valid_before(now - dt.timedelta(minutes=5))
        .not_valid_after(now + dt.timedelta(days=1))
        .add_extension(
            x509.SubjectAlternativeName([x509.IPAddress(ipaddress.ip_address("127.0.0.1"))]),
            critical=False,
        )
        .sign(key, hashes.SHA256())
    )
    cert_path, key_path = folder / "bench.crt", folder / "bench.key"
    cert_path.write_bytes(cert.public_bytes(serialization.Encoding.PEM))
    key_path.write_bytes(
        key.private_bytes(
            serialization.Encoding.PEM,
            serialization.PrivateFormat.PKCS8,
            serialization.NoEncryption(),
        )
    )
    return cert_path, key_path


@contextmanager
def serving(*args: str) -> Iterator[subprocess.Popen[bytes]]:
    proc = subprocess.Popen([TESTPLAN, "serve", *args], stderr=subprocess.PIPE)
    try:
        yield proc
    finally:
        proc.terminate()
        proc.wait(timeout=10)
        if proc.stderr:
            proc.stderr.close()


def first_reply(url: str, **kwargs: object) -> object:
    import httpx2 as httpx

    for _ in range(100):
        try:
            return httpx.get(url, timeout=2, **kwargs)  # type: ignore[arg-type]
        except httpx.TransportError:
            time.sleep(0.1)
    raise AssertionError(f"nothing answered at {url}")


def test_serve_over_tls_sets_secure_cookies(bench: Bench, tmp_path: Path) -> None:
    cert, key = self_signed(tmp_path)
    port = free_port()
    args = ["--db", bench.url, "--port", str(port), "--certfile", str(cert), "--keyfile", str(key)]
    with serving(*args):
        trust = ssl.create_default_context(cafile=str(cert))
        reply = first_reply(f"https://127.0.0.1:{port}/login", verify=trust)
    assert reply.status_code == 200  # type: ignore[attr-defined]
    cookie = reply.headers["set-cookie"].lower()  # type: ignore[attr-defined]
    assert "secure" in cookie and "httponly" in cookie and "samesite=strict" in cookie


def test_serve_on_loopback_redirects_to_the_login(bench: Bench) -> None:
    port = free_port()
    with serving("--db", bench.url, "--port", str(port)):
        reply = first_reply(f"http://127.0.0.1:{port}/", follow_redirects=False)
    assert reply.status_code == 303  # type: ignore[attr-defined]
    assert reply.headers["location"] == "/login"  # type: ignore[attr-defined]
