"""Ed25519 signing keys: a private key in a passphrase-protected PEM file the person
keeps, and its public key (raw 32 bytes, base64) registered in the people register."""

from __future__ import annotations

import base64
import hashlib
from pathlib import Path
from typing import TYPE_CHECKING

from testplan.errors import TestplanError

if TYPE_CHECKING:  # pragma: no cover
    from cryptography.hazmat.primitives.asymmetric.ed25519 import Ed25519PrivateKey


class KeyFileError(TestplanError):
    """A key file cannot be read, or its passphrase is wrong."""


def new_private_pem(passphrase: str) -> tuple[bytes, str]:
    """A new key pair: the private key as encrypted PEM, the public key in base64."""
    from cryptography.hazmat.primitives import serialization
    from cryptography.hazmat.primitives.asymmetric.ed25519 import Ed25519PrivateKey

    if len(passphrase) < 8:
        raise KeyFileError("the passphrase must be at least 8 characters", key="passphrase")
    key = Ed25519PrivateKey.generate()
    pem = key.private_bytes(
        serialization.Encoding.PEM,
        serialization.PrivateFormat.PKCS8,
        serialization.BestAvailableEncryption(passphrase.encode()),
    )
    return pem, public_of(key)


def public_of(key: Ed25519PrivateKey) -> str:
    from cryptography.hazmat.primitives import serialization

    raw = key.public_key().public_bytes(serialization.Encoding.Raw, serialization.PublicFormat.Raw)
    return base64.b64encode(raw).decode()


def fingerprint(public_b64: str) -> str:
    """SHA-256 of the raw public key, hex: how a key is named in reports and messages."""
    return hashlib.sha256(base64.b64decode(public_b64)).hexdigest()


def load_private(path: Path, passphrase: str) -> Ed25519PrivateKey:
    try:
        data = path.read_bytes()
    except FileNotFoundError:
        raise KeyFileError("no such key file", file=path, key="--key") from None
    except OSError as err:
        raise KeyFileError(f"cannot read: {err.strerror}", file=path, key="--key") from None
    return private_from_pem(data, passphrase, path)


def private_from_pem(data: bytes, passphrase: str, name: str | Path) -> Ed25519PrivateKey:
    """Open a passphrase-protected key file's bytes (``name`` is used in messages)."""
    from cryptography.hazmat.primitives import serialization
    from cryptography.hazmat.primitives.asymmetric.ed25519 import Ed25519PrivateKey

    try:
        key = serialization.load_pem_private_key(data, passphrase.encode())
    except (ValueError, TypeError):
        raise KeyFileError(
            "cannot open the key: wrong passphrase, or not a testplan key file",
            file=name,
            key="--key",
        ) from None
    if not isinstance(key, Ed25519PrivateKey):
        raise KeyFileError("not an Ed25519 key", file=name, key="--key")
    return key


def read_public(path: Path) -> str:
    """A public key file written by `testplan keys new` (base64 on one line)."""
    try:
        text = path.read_text(encoding="utf-8").strip()
    except FileNotFoundError:
        raise KeyFileError("no such public key file", file=path, key="--public") from None
    try:
        raw = base64.b64decode(text, validate=True)
    except ValueError:
        raw = b""
    if len(raw) != 32:
        raise KeyFileError(
            "not an Ed25519 public key (32 bytes, base64)", file=path, key="--public"
        )
    return text


def sign(key: Ed25519PrivateKey, message: bytes) -> str:
    return base64.b64encode(key.sign(message)).decode()


def verify(public_b64: str, message: bytes, signature_b64: str) -> bool:
    from cryptography.exceptions import InvalidSignature
    from cryptography.hazmat.primitives.asymmetric.ed25519 import Ed25519PublicKey

    try:
        Ed25519PublicKey.from_public_bytes(base64.b64decode(public_b64)).verify(
            base64.b64decode(signature_b64), message
        )
    except (InvalidSignature, ValueError):
        return False
    return True
