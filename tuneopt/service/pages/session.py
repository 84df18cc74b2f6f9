"""The shop pages' log-in: a cookie holding an expiry and an HMAC-SHA256 over it, keyed by a key
derived from the API key (a new API key ends every session). The cookie never holds the key."""

from __future__ import annotations

import hashlib
import hmac

__all__ = ["SESSION_COOKIE", "SESSION_SECONDS", "session_key", "session_valid", "session_value"]

SESSION_COOKIE = "tuneopt_session"
SESSION_SECONDS = 16 * 3600  # an evening's submission and the next morning's look


def session_key(api_key: str) -> bytes:
    """The cookies' signing key, derived from the API key (the key itself signs nothing)."""
    return hmac.new(api_key.encode(), b"tuneopt shop pages session", hashlib.sha256).digest()


def session_value(key: bytes, expires: int) -> str:
    """A session cookie's value: its expiry (Unix seconds) and the signature over it."""
    mac = hmac.new(key, f"session:{expires}".encode(), hashlib.sha256).hexdigest()
    return f"{expires}.{mac}"


def session_valid(key: bytes, value: str | None, now: float) -> bool:
    if not value:
        return False
    expires, _, _ = value.partition(".")
    if not expires.isdigit() or len(expires) > 12:
        return False
    expected = session_value(key, int(expires))
    return hmac.compare_digest(value.encode(), expected.encode()) and int(expires) > now
