"""Ed25519 signing keys: a private key in a passphrase-protected PEM file the person
keeps, and a public key file (JSON: the person, the public key as raw 32 bytes in base64,
and a self-signature proving the holder has the private key) that a manager enrols."""

from __future__ import annotations

import base64
import hashlib
import json
from dataclasses import dataclass
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
    """The raw public key of ``key``, base64."""
    from cryptography.hazmat.primitives import serialization

    raw = key.public_key().public_bytes(serialization.Encoding.Raw, serialization.PublicFormat.Raw)
    return base64.b64encode(raw).decode()


def fingerprint(public_b64: str) -> str:
    """SHA-256 of the raw public key, hex: how a key is named in reports and messages."""
    return hashlib.sha256(base64.b64decode(public_b64)).hexdigest()


def load_private(path: Path, passphrase: str) -> Ed25519PrivateKey:
    """The private key in ``path``; KeyFileError (one line) for a missing, truncated,
    unencrypted or wrong-type file, or another passphrase."""
    try:
        data = path.read_bytes()
    except FileNotFoundError:
        raise KeyFileError("no such key file", file=path, key="--key") from None
    except OSError as err:
        raise KeyFileError(f"cannot read: {err.strerror}", file=path, key="--key") from None
    return load_private_bytes(data, passphrase, path)


def load_private_bytes(data: bytes, passphrase: str, path: Path | None = None) -> Ed25519PrivateKey:
    """The private key in PEM ``data`` (see ``load_private``)."""
    from cryptography.hazmat.primitives import serialization
    from cryptography.hazmat.primitives.asymmetric.ed25519 import Ed25519PrivateKey

    try:
        key = serialization.load_pem_private_key(data, passphrase.encode())
    except TypeError:
        raise KeyFileError(
            "the key file is not passphrase-protected; make keys with `testplan keys new`",
            file=path,
            key="--key",
        ) from None
    except (ValueError, IndexError):
        raise KeyFileError(
            "cannot open the key: wrong passphrase, or not a testplan key file",
            file=path,
            key="--key",
        ) from None
    except Exception:  # the PEM backend raises its own types for some damaged files
        raise KeyFileError("not a readable key file", file=path, key="--key") from None
    if not isinstance(key, Ed25519PrivateKey):
        raise KeyFileError("not an Ed25519 key", file=path, key="--key")
    return key


def proof_message(initials: str, public_b64: str) -> bytes:
    """What a key's self-signature covers: the person it is made for and the key."""
    body = {"testplan_key_proof": 1, "person": initials, "public_key": public_b64}
    return json.dumps(body, sort_keys=True, separators=(",", ":")).encode()


@dataclass(frozen=True)
class PublicKeyFile:
    """A public key file: whose key it claims to be, the key, and its self-signature."""

    person: str
    public_key: str
    proof: str

    def to_text(self) -> str:
        body = {
            "testplan_public_key": 1,
            "person": self.person,
            "public_key": self.public_key,
            "proof": self.proof,
        }
        return json.dumps(body, indent=1, sort_keys=True) + "\n"

    def proves_possession(self) -> bool:
        return verify(self.public_key, proof_message(self.person, self.public_key), self.proof)


def public_file(key: Ed25519PrivateKey, initials: str) -> PublicKeyFile:
    """The public key file of ``key`` for ``initials``, self-signed."""
    public = public_of(key)
    return PublicKeyFile(initials, public, sign(key, proof_message(initials, public)))


def read_public(path: Path) -> PublicKeyFile:
    """A public key file written by `testplan keys new`; KeyFileError when it is not one."""
    try:
        text = path.read_text(encoding="utf-8")
    except FileNotFoundError:
        raise KeyFileError("no such public key file", file=path, key="--public") from None
    except (OSError, UnicodeDecodeError):
        raise KeyFileError("cannot read the public key file", file=path, key="--public") from None
    try:
        body = json.loads(text)
        found = PublicKeyFile(str(body["person"]), str(body["public_key"]), str(body["proof"]))
        raw = base64.b64decode(found.public_key, validate=True)
    except (ValueError, KeyError, TypeError):
        raw = b""
    if len(raw) != 32:
        raise KeyFileError(
            "not a testplan public key file (written by `testplan keys new`)",
            file=path,
            key="--public",
        )
    return found


def sign(key: Ed25519PrivateKey, message: bytes) -> str:
    """The Ed25519 signature of ``message``, base64."""
    return base64.b64encode(key.sign(message)).decode()


def verify(public_b64: str, message: bytes, signature_b64: str) -> bool:
    """Whether ``signature_b64`` is the key's signature of ``message``."""
    from cryptography.exceptions import InvalidSignature
    from cryptography.hazmat.primitives.asymmetric.ed25519 import Ed25519PublicKey

    try:
        Ed25519PublicKey.from_public_bytes(base64.b64decode(public_b64)).verify(
            base64.b64decode(signature_b64), message
        )
    except (InvalidSignature, ValueError):
        return False
    return True
