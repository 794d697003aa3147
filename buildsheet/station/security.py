"""CSRF tokens and the organiser PIN: HMAC-SHA256 over a per-browser random client ID.

Every browser gets a random client ID in an HttpOnly, SameSite=Strict cookie; each form carries
``HMAC(secret, "csrf:" + client)`` and a POST is refused unless the two agree (the synchronizer
token pattern of the OWASP CSRF cheat sheet, common practice). The organiser's session cookie is
``HMAC(secret, "organiser:" + client)``, set after the right PIN. The secret is random per run.
"""

from __future__ import annotations

import hashlib
import hmac
import secrets
from dataclasses import dataclass
from typing import Any

#: Record-store state key of the organiser PIN.
PIN_KEY = "organiser_pin"
CLIENT_COOKIE = "bs_client"
ORGANISER_COOKIE = "bs_organiser"
CSRF_FIELD = "csrf"
PIN_DIGITS = 6
#: Wrong PINs allowed from one browser before it must wait, and how long it waits, seconds.
PIN_ATTEMPTS = 5
PIN_LOCKOUT_S = 60.0


@dataclass(frozen=True)
class Keys:
    """The run's signing secret (bytes) and the organiser PIN (digits)."""

    secret: bytes
    pin: str


def new_secret() -> bytes:
    """32 random bytes for signing this run's tokens."""
    return secrets.token_bytes(32)


def new_pin() -> str:
    """A random PIN of :data:`PIN_DIGITS` digits (leading zeros kept)."""
    return f"{secrets.randbelow(10 ** PIN_DIGITS):0{PIN_DIGITS}d}"


def new_client_id() -> str:
    """A random browser ID for the client cookie (128 bits, hex)."""
    return secrets.token_hex(16)


def _sign(secret: bytes, purpose: str, client: str) -> str:
    return hmac.new(secret, f"{purpose}:{client}".encode(), hashlib.sha256).hexdigest()[:40]


def csrf_token(secret: bytes, client: str) -> str:
    """The form token for this browser."""
    return _sign(secret, "csrf", client)


def csrf_ok(secret: bytes, client: str | None, token: str | None) -> bool:
    """True when the form's token belongs to the browser's client cookie (constant time)."""
    if not client or not token:
        return False
    return hmac.compare_digest(csrf_token(secret, client), token)


def organiser_token(secret: bytes, client: str) -> str:
    """The organiser session cookie value for this browser."""
    return _sign(secret, "organiser", client)


def organiser_ok(secret: bytes, client: str | None, token: str | None) -> bool:
    """True when the browser holds a valid organiser session."""
    if not client or not token:
        return False
    return hmac.compare_digest(organiser_token(secret, client), token)


def pin_ok(pin: str, entered: str) -> bool:
    """Compare an entered PIN with the organiser's (constant time, spaces ignored)."""
    return hmac.compare_digest(pin.encode(), "".join(entered.split()).encode())


def organiser_pin(store: Any) -> str:
    """The organiser PIN kept in the record store's state, created on first use (the packet
    prints it on the organiser's cover page; the station asks for it)."""
    from buildsheet.store.ledger import setdefault_state

    return setdefault_state(store, PIN_KEY, new_pin())
