"""Review access: one random token per shared server, kept only as a hash, and rate caps.

A shared server (``posebridge serve --share``) makes a fresh token with
:func:`new_review_token`, prints the review link once, and keeps only
:class:`ReviewAccess` (the SHA-256 digest of the token). A presented token is
hashed and compared with :func:`hmac.compare_digest`, so the comparison
takes the same time wherever the first differing byte is. The token carries
256 random bits (:func:`secrets.token_urlsafe`), so a plain, fast hash is
enough: there is nothing to gain from a slow password hash against a
search space of 2**256 (common practice, no source).

:class:`RateLimiter` caps requests per client with a token bucket per
``(client, kind)``: the bucket holds at most ``burst`` requests and refills
at ``per_second``; a request takes one, and when the bucket is empty the
caller is told how long to wait (token bucket, common practice, no source).
"""

from __future__ import annotations

import hashlib
import hmac
import secrets
import threading
import time
from collections import OrderedDict
from collections.abc import Callable, Mapping
from dataclasses import dataclass, field
from urllib.parse import quote

__all__ = [
    "MAX_TOKEN_CHARS",
    "REVIEW_TOKEN_BYTES",
    "RateCap",
    "RateLimiter",
    "ReviewAccess",
    "new_review_token",
    "review_link",
    "token_sha256",
]

REVIEW_TOKEN_BYTES = 32
"""Random bytes in a review token (256 bits; 43 URL-safe characters)."""
MAX_TOKEN_CHARS = 256
"""Longer presented tokens are refused without hashing them."""
_MIN_TOKEN_CHARS = 16


def new_review_token() -> str:
    """Return a fresh review token: :data:`REVIEW_TOKEN_BYTES` random bytes, URL-safe base64."""
    return secrets.token_urlsafe(REVIEW_TOKEN_BYTES)


def token_sha256(token: str) -> bytes:
    """SHA-256 digest of a token's UTF-8 bytes (32 bytes)."""
    return hashlib.sha256(token.encode("utf-8")).digest()


@dataclass(frozen=True)
class ReviewAccess:
    """The review token of a shared server, as its SHA-256 digest only.

    Attributes
    ----------
    token_digest : bytes
        SHA-256 of the token (see :func:`token_sha256`).
    """

    token_digest: bytes = field(repr=False)

    def __post_init__(self) -> None:
        """Check that the digest is a SHA-256 digest."""
        if len(self.token_digest) != hashlib.sha256().digest_size:
            raise ValueError(
                f"token_digest: expected a 32-byte SHA-256 digest, got {len(self.token_digest)} bytes"
            )

    @classmethod
    def from_token(cls, token: str) -> ReviewAccess:
        """Access for ``token``; the token itself is not kept.

        Raises
        ------
        ValueError
            The token is shorter than 16 or longer than :data:`MAX_TOKEN_CHARS` characters.
        """
        if not _MIN_TOKEN_CHARS <= len(token) <= MAX_TOKEN_CHARS:
            raise ValueError(
                f"token: expected {_MIN_TOKEN_CHARS} to {MAX_TOKEN_CHARS} characters, got {len(token)}"
            )
        return cls(token_digest=token_sha256(token))

    def accepts(self, presented: str | None) -> bool:
        """Whether ``presented`` is the review token (constant-time digest comparison)."""
        if presented is None or not 0 < len(presented) <= MAX_TOKEN_CHARS:
            return False
        return hmac.compare_digest(token_sha256(presented), self.token_digest)


def review_link(base_url: str, token: str) -> str:
    """Return the link a reviewer opens: ``<base_url>?token=<token>``.

    Parameters
    ----------
    base_url : str
        The server's page URL ending in ``/``, e.g. ``http://192.0.2.7:8000/``.
    token : str
    """
    return f"{base_url}?token={quote(token, safe='')}"


@dataclass(frozen=True)
class RateCap:
    """A token-bucket cap: ``burst`` requests at once, refilled at ``per_second``.

    Attributes
    ----------
    per_second : float
        Sustained requests per second (> 0).
    burst : int
        Requests allowed back to back from a full bucket (>= 1).
    """

    per_second: float
    burst: int

    def __post_init__(self) -> None:
        """Check the rate (positive) and the burst (at least 1)."""
        if not self.per_second > 0.0:
            raise ValueError(f"per_second: expected > 0, got {self.per_second!r}")
        if self.burst < 1:
            raise ValueError(f"burst: expected >= 1, got {self.burst!r}")


class RateLimiter:
    """Per-client token buckets, one per ``(client, kind)`` (module docstring).

    Parameters
    ----------
    caps : mapping of str to RateCap
        The cap of each request kind.
    max_clients : int, keyword-only
        Buckets kept; the least recently used are dropped beyond this, so
        many clients cannot grow the table without bound (a dropped client
        starts again with a full bucket).
    clock : callable, keyword-only
        Monotonic seconds; :func:`time.monotonic` by default.
    """

    def __init__(
        self,
        caps: Mapping[str, RateCap],
        *,
        max_clients: int = 4096,
        clock: Callable[[], float] = time.monotonic,
    ) -> None:
        if max_clients < 1:
            raise ValueError(f"max_clients: expected >= 1, got {max_clients!r}")
        self._caps = dict(caps)
        self._max_clients = max_clients
        self._clock = clock
        self._buckets: OrderedDict[tuple[str, str], tuple[float, float]] = OrderedDict()
        self._lock = threading.Lock()

    def take(self, client: str, kind: str, cost: float = 1.0) -> float:
        """Take ``cost`` units from the bucket of ``(client, kind)``.

        One request by default; rows or targets for a cost budget.

        Returns
        -------
        float
            0 if the request may go ahead, else the seconds until the bucket
            holds ``cost`` again (the request is then not counted; a cost above
            the burst waits for a full bucket).

        Raises
        ------
        KeyError
            ``kind`` has no cap.
        """
        cap = self._caps[kind]
        cost = min(float(cost), float(cap.burst))
        now = self._clock()
        key = (client, kind)
        with self._lock:
            level, then = self._buckets.get(key, (float(cap.burst), now))
            level = min(float(cap.burst), level + (now - then) * cap.per_second)
            if level >= cost:
                level -= cost
                wait = 0.0
            else:
                wait = (cost - level) / cap.per_second
            self._buckets[key] = (level, now)
            self._buckets.move_to_end(key)
            while len(self._buckets) > self._max_clients:
                self._buckets.popitem(last=False)
        return wait
