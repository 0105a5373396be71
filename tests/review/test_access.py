"""Review tokens and rate caps.

Token sizes follow from base64 without padding (RFC 4648, sec. 5: 4 characters
per 3 bytes); the digest is checked against the SHA-256 test vector of
FIPS 180-2 (appendix B.1, message "abc"). Rate caps are a token bucket
(common practice, no source): expected waits are the closed form
``(1 - level) / rate``.
"""

from __future__ import annotations

import math
import re

import pytest

from posebridge.review.access import (
    MAX_TOKEN_CHARS,
    REVIEW_TOKEN_BYTES,
    RateCap,
    RateLimiter,
    ReviewAccess,
    new_review_token,
    review_link,
    token_sha256,
)


class FakeClock:
    """Monotonic seconds the test moves by hand."""

    def __init__(self) -> None:
        self.now = 100.0

    def __call__(self) -> float:
        return self.now


def test_new_review_token_is_url_safe_and_fresh() -> None:
    tokens = {new_review_token() for _ in range(50)}
    assert len(tokens) == 50  # 256 random bits: a repeat is practically impossible
    for token in tokens:
        # RFC 4648 sec. 5: ceil(32 * 4 / 3) = 43 URL-safe characters without padding
        assert len(token) == math.ceil(REVIEW_TOKEN_BYTES * 4 / 3) == 43
        assert re.fullmatch(r"[A-Za-z0-9_-]+", token)


def test_token_sha256_matches_fips_test_vector() -> None:
    # FIPS 180-2, appendix B.1: SHA-256("abc")
    expected = "ba7816bf8f01cfea414140de5dae2223b00361a396177a9cb410ff61f20015ad"
    assert token_sha256("abc").hex() == expected


def test_review_access_accepts_only_its_token() -> None:
    token = new_review_token()
    access = ReviewAccess.from_token(token)
    assert access.accepts(token)
    assert not access.accepts(token[:-1])
    assert not access.accepts(token + "x")
    assert not access.accepts("")
    assert not access.accepts(None)
    assert not access.accepts("a" * (MAX_TOKEN_CHARS + 1))


def test_review_access_keeps_no_token_and_shows_no_digest() -> None:
    token = new_review_token()
    access = ReviewAccess.from_token(token)
    assert token not in repr(access)
    assert access.token_digest.hex() not in repr(access)
    assert token.encode() not in access.token_digest


@pytest.mark.parametrize("token", ["short", "x" * (MAX_TOKEN_CHARS + 1)])
def test_review_access_refuses_bad_token_length(token: str) -> None:
    with pytest.raises(ValueError, match=r"^token: expected 16 to 256 characters, got \d+$"):
        ReviewAccess.from_token(token)


def test_review_access_refuses_wrong_digest_size() -> None:
    with pytest.raises(ValueError, match="token_digest: expected a 32-byte SHA-256 digest"):
        ReviewAccess(token_digest=b"abc")


def test_review_link_puts_token_in_query() -> None:
    assert review_link("http://192.0.2.7:8000/", "abc_DEF-123") == (
        "http://192.0.2.7:8000/?token=abc_DEF-123"
    )
    # reserved characters are percent-encoded (RFC 3986, sec. 2.1)
    assert review_link("http://h:1/", "a/b+c") == "http://h:1/?token=a%2Fb%2Bc"


def test_rate_limiter_allows_burst_then_waits() -> None:
    clock = FakeClock()
    limiter = RateLimiter({"read": RateCap(per_second=2.0, burst=3)}, clock=clock)
    assert [limiter.take("10.0.0.5", "read") for _ in range(3)] == [0.0, 0.0, 0.0]
    # empty bucket: wait (1 - 0) / 2 per second = 0.5 s (closed form)
    assert limiter.take("10.0.0.5", "read") == pytest.approx(0.5)
    clock.now += 0.25  # half a request refilled: wait (1 - 0.5) / 2 = 0.25 s
    assert limiter.take("10.0.0.5", "read") == pytest.approx(0.25)
    clock.now += 0.25
    assert limiter.take("10.0.0.5", "read") == 0.0


def test_rate_limiter_refills_to_burst_only() -> None:
    clock = FakeClock()
    limiter = RateLimiter({"read": RateCap(per_second=1.0, burst=2)}, clock=clock)
    limiter.take("a", "read")
    clock.now += 1000.0  # a long pause refills to the burst, not beyond
    assert [limiter.take("a", "read") for _ in range(2)] == [0.0, 0.0]
    assert limiter.take("a", "read") > 0.0


def test_rate_limiter_keeps_clients_and_kinds_apart() -> None:
    clock = FakeClock()
    limiter = RateLimiter(
        {"read": RateCap(per_second=1.0, burst=1), "comment": RateCap(per_second=1.0, burst=1)},
        clock=clock,
    )
    assert limiter.take("a", "read") == 0.0
    assert limiter.take("a", "read") > 0.0
    assert limiter.take("b", "read") == 0.0
    assert limiter.take("a", "comment") == 0.0


def test_rate_limiter_forgets_least_recent_client_beyond_max() -> None:
    clock = FakeClock()
    limiter = RateLimiter({"read": RateCap(per_second=1.0, burst=1)}, max_clients=2, clock=clock)
    limiter.take("a", "read")
    limiter.take("b", "read")
    limiter.take("c", "read")  # drops "a", the least recently used
    assert limiter.take("a", "read") == 0.0  # starts again with a full bucket
    assert limiter.take("c", "read") > 0.0


def test_rate_limiter_refuses_unknown_kind() -> None:
    limiter = RateLimiter({"read": RateCap(per_second=1.0, burst=1)})
    with pytest.raises(KeyError):
        limiter.take("a", "write")


@pytest.mark.parametrize(
    ("per_second", "burst", "message"),
    [(0.0, 1, "per_second: expected > 0, got 0.0"), (1.0, 0, "burst: expected >= 1, got 0")],
)
def test_rate_cap_refuses_bad_values(per_second: float, burst: int, message: str) -> None:
    with pytest.raises(ValueError, match=f"^{re.escape(message)}$"):
        RateCap(per_second=per_second, burst=burst)
