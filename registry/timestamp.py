"""RFC 3161 time-stamp tokens for registrations: the statement, the request, the reply and its check.

A registration's *statement* is a small canonical JSON text naming the spec id, the
registration version, the canonical content SHA-256 and the commit. An independent
time-stamping authority (TSA) signs the SHA-256 of that text together with its own clock
reading; the reply travels in the registration tag's message (see
:mod:`registry.registration`), and :func:`check_token` verifies it offline against trust
anchors the reviewer chooses. All ASN.1 and CMS work is done by ``rfc3161-client`` and
``cryptography``; this module writes no DER itself.

>>> statement("fibre-butyrate", 1, "9f2c", "ab12")
b'{"commit":"ab12","content-sha256":"9f2c","id":"fibre-butyrate","statement":"prespec registration","version":1}'
>>> len(statement_digest(statement("a", 1, "0" * 64, "c" * 40)))
32
"""

from __future__ import annotations

import hashlib
import json
import socket
import urllib.error
import urllib.request
from dataclasses import dataclass, field
from datetime import date, datetime, timezone
from pathlib import Path
from typing import Any

__all__ = ["statement", "statement_digest", "TimestampError", "InvalidTrust", "TimestampRequest",
           "make_request", "read_request", "ask_authority", "accept_reply", "TokenCheck", "check_token",
           "load_trust", "REQUEST_TYPE", "REPLY_TYPE", "DEFAULT_TIMEOUT"]

#: The media types of RFC 3161 section 3.4 (time-stamp protocol via HTTP).
REQUEST_TYPE = "application/timestamp-query"
REPLY_TYPE = "application/timestamp-reply"
#: Seconds to wait for an authority before giving up.
DEFAULT_TIMEOUT = 20.0
_MAX_REPLY = 1 << 20
_SHA256_OID = "2.16.840.1.101.3.4.2.1"


class TimestampError(ValueError):
    """An authority could not be asked, or its reply is not a token for this registration."""


class InvalidTrust(ValueError):
    """A trust-anchor file that holds no PEM certificate; the message names the file."""


def statement(spec_id: str, version: int, content_sha256: str, commit: str) -> bytes:
    """The canonical registration statement a token's message imprint is the SHA-256 of."""
    data = {"statement": "prespec registration", "id": spec_id, "version": version,
            "content-sha256": content_sha256, "commit": commit}
    return json.dumps(data, sort_keys=True, separators=(",", ":"), ensure_ascii=False).encode("utf-8")


def statement_digest(text: bytes) -> bytes:
    return hashlib.sha256(text).digest()


@dataclass(frozen=True)
class TimestampRequest:
    """An RFC 3161 request (DER, as the library built it) and its nonce."""

    der: bytes
    nonce: int | None


def make_request(text: bytes) -> TimestampRequest:
    """A SHA-256 request for ``text`` with a fresh random nonce, asking for the authority's certificate."""
    from rfc3161_client import HashAlgorithm, TimestampRequestBuilder

    request = (TimestampRequestBuilder().data(text).hash_algorithm(HashAlgorithm.SHA256)
               .nonce(nonce=True).cert_request(cert_request=True).build())
    return TimestampRequest(request.as_bytes(), request.nonce)


def read_request(data: bytes, source: str) -> TimestampRequest:
    """A request written earlier (``register --timestamp-request``), read back for its nonce."""
    from rfc3161_client import _rust

    try:
        request = _rust.parse_timestamp_request(data)
    except Exception as error:  # noqa: BLE001 - the library raises its own parse errors
        raise TimestampError(f"{source} is not an RFC 3161 time-stamp request ({_first_line(error)})") from None
    return TimestampRequest(data, request.nonce)


def _first_line(error: BaseException) -> str:
    text = str(error).strip().splitlines()
    return text[0][:200] if text else type(error).__name__


def ask_authority(url: str, request: TimestampRequest, text: bytes, *,
                  timeout: float = DEFAULT_TIMEOUT) -> bytes:
    """POST ``request`` to the authority at ``url`` and return its reply (DER) once it is a granted
    token for ``text`` with the request's nonce; :class:`TimestampError` otherwise."""
    if not url.lower().startswith(("http://", "https://")):
        raise TimestampError(f"time-stamping authority {url!r}: only http:// and https:// addresses are allowed")
    http = urllib.request.Request(url, data=request.der, method="POST",
                                  headers={"Content-Type": REQUEST_TYPE, "Accept": REPLY_TYPE})
    try:
        with urllib.request.urlopen(http, timeout=timeout) as response:  # noqa: S310 - scheme checked above
            kind = (response.headers.get("Content-Type") or "").split(";")[0].strip().lower()
            body = response.read(_MAX_REPLY + 1)
    except urllib.error.HTTPError as error:
        raise TimestampError(f"time-stamping authority {url} answered HTTP {error.code} {error.reason}") from None
    except (socket.timeout, TimeoutError):
        raise TimestampError(f"time-stamping authority {url} did not answer within {timeout:g} s") from None
    except urllib.error.URLError as error:
        reason = error.reason
        if isinstance(reason, (socket.timeout, TimeoutError)):
            raise TimestampError(f"time-stamping authority {url} did not answer within {timeout:g} s") from None
        raise TimestampError(f"time-stamping authority {url} cannot be reached: {reason}") from None
    except (OSError, ValueError) as error:
        raise TimestampError(f"time-stamping authority {url} cannot be asked: {error}") from None
    if len(body) > _MAX_REPLY:
        raise TimestampError(f"time-stamping authority {url} sent more than {_MAX_REPLY} bytes: not a token")
    if kind != REPLY_TYPE:
        raise TimestampError(f"time-stamping authority {url} answered with {kind or 'no content type'}, not an "
                             f"RFC 3161 reply ({REPLY_TYPE}); check the address")
    return accept_reply(body, text, request.nonce, source=url)


def accept_reply(data: bytes, text: bytes, nonce: int | None, *, source: str) -> bytes:
    """``data`` if it is a granted reply whose imprint is SHA-256 of ``text`` (and whose nonce is
    ``nonce``, when given); :class:`TimestampError` naming ``source`` otherwise."""
    from rfc3161_client import PKIStatus, decode_timestamp_response

    try:
        reply = decode_timestamp_response(data)
    except Exception as error:  # noqa: BLE001 - the library raises its own parse errors
        raise TimestampError(f"{source} sent something that is not an RFC 3161 reply ({_first_line(error)})") \
            from None
    if reply.status not in (PKIStatus.GRANTED, PKIStatus.GRANTED_WITH_MODS):
        said = "; ".join(reply.status_string) if reply.status_string else ""
        raise TimestampError(f"{source} refused the request (status {reply.status}{': ' + said if said else ''})")
    problems = _imprint_problems(reply, text)
    if nonce is not None and reply.tst_info.nonce != nonce:
        problems.append("its nonce is not the request's (a replayed or mixed-up reply)")
    if problems:
        raise TimestampError(f"the reply from {source} is not a token for this registration: " + "; ".join(problems))
    return data


def _imprint_problems(reply: Any, text: bytes) -> list[str]:
    imprint = reply.tst_info.message_imprint
    if imprint.hash_algorithm.dotted_string != _SHA256_OID:
        return [f"its imprint uses hash {imprint.hash_algorithm.dotted_string}, not SHA-256"]
    if imprint.message != statement_digest(text):
        return ["its message imprint is not the SHA-256 of this registration's statement (a token for other "
                "content, another commit or another spec)"]
    return []


def load_trust(paths: list[Path]) -> list[Any]:
    """The certificates of PEM files (each may hold several); :class:`InvalidTrust` naming a bad file."""
    from cryptography import x509

    out = []
    for path in paths:
        try:
            data = Path(path).read_bytes()
        except OSError as error:
            raise InvalidTrust(f"trust anchor {path}: cannot be read ({error.strerror or error})") from None
        try:
            certs = x509.load_pem_x509_certificates(data)
        except ValueError:
            certs = []
        if not certs:
            raise InvalidTrust(f"trust anchor {path}: holds no PEM certificate (-----BEGIN CERTIFICATE-----); give "
                               "the authority's CA certificate in PEM form")
        out += certs
    return out


@dataclass
class TokenCheck:
    """What one token shows (``verify --json`` puts it under ``timestamp``)."""

    time: datetime | None = None
    authority: str | None = None
    verified: bool = False
    before_start: bool = False
    problems: list[str] = field(default_factory=list)
    #: Problems that make the registration fail (a bad token), as opposed to a token left unchecked.
    failed: bool = False

    def to_dict(self) -> dict[str, Any]:
        when = self.time.astimezone(timezone.utc).isoformat().replace("+00:00", "Z") if self.time else None
        return {"time": when, "authority": self.authority, "verified": self.verified,
                "before_start": self.before_start, "problems": list(self.problems)}


def _leaf(reply: Any) -> Any:
    from cryptography import x509

    certs = [x509.load_der_x509_certificate(c) for c in reply.signed_data.certificates]
    for info in reply.signed_data.signer_infos:
        for cert in certs:
            if cert.issuer == info.issuer and cert.serial_number == info.serial_number:
                return cert
    return None


def check_token(data: bytes, text: bytes, start: date, trust: list[Any]) -> TokenCheck:
    """Check a stored reply offline: signature and chain to ``trust``, the timeStamping key usage,
    the imprint against ``text`` (the statement recomputed from the repository) and the time
    before ``start`` (read as a UTC calendar date)."""
    result = TokenCheck()
    try:
        return _check_token(data, text, start, trust, result)
    except Exception as error:  # noqa: BLE001 - an altered token may trip the parser anywhere: a finding
        result.problems.append(f"the stored token cannot be read ({_first_line(error)}): it was damaged or altered")
        result.verified, result.failed = False, True
        return result


def _check_token(data: bytes, text: bytes, start: date, trust: list[Any], result: TokenCheck) -> TokenCheck:
    from cryptography import x509
    from rfc3161_client import VerificationError, VerifierBuilder, decode_timestamp_response

    try:
        reply = decode_timestamp_response(data)
        info = reply.tst_info
        result.time = info.gen_time if info.gen_time.tzinfo else info.gen_time.replace(tzinfo=timezone.utc)
    except Exception as error:  # noqa: BLE001 - a damaged token is a finding, not a crash
        result.problems.append(f"the stored token cannot be read as an RFC 3161 reply ({_first_line(error)}): it "
                               "was damaged or altered")
        result.failed = True
        return result
    try:
        leaf = _leaf(reply)
    except Exception as error:  # noqa: BLE001 - an altered certificate is a finding, not a crash
        result.problems.append(f"the certificate in the stored token cannot be read ({_first_line(error)}): it was "
                               "damaged or altered")
        result.failed = True
        return result
    result.authority = leaf.subject.rfc4514_string() if leaf is not None else None
    result.before_start = result.time.astimezone(timezone.utc).date() < start
    if not result.before_start:
        result.problems.append(f"the token's time {result.to_dict()['time']} is not before the start of data "
                               f"collection ({start})")
        result.failed = True
    imprint = _imprint_problems(reply, text)
    if imprint:
        result.problems += ["the token " + p.removeprefix("its ") for p in imprint]
        result.failed = True
    if leaf is None:
        result.problems.append("the token carries no certificate of the authority that signed it")
        result.failed = True
        return result
    try:
        usage = leaf.extensions.get_extension_for_class(x509.ExtendedKeyUsage).value
        stamping = x509.ExtendedKeyUsageOID.TIME_STAMPING in usage
    except x509.ExtensionNotFound:
        stamping = False
    if not stamping:
        result.problems.append(f"the signing certificate ({result.authority}) is not for time-stamping (no "
                               "extended key usage timeStamping)")
        result.failed = True
    if not trust:
        result.problems.append("no trust anchor given, so the authority's signature was not checked: pass "
                               "--trust CA.pem (the authority's CA certificate) or set timestamp.trust in "
                               ".prespec.yaml")
        return result
    if imprint or not stamping:
        return result
    builder = VerifierBuilder()
    for cert in trust:
        builder = builder.add_root_certificate(cert)
    try:
        builder.build().verify(reply, statement_digest(text))
    except VerificationError as error:
        result.problems.append(f"the token's signature does not verify against the trust anchors: {error}")
        result.failed = True
        return result
    except Exception as error:  # noqa: BLE001 - a malformed token may trip the library anywhere
        result.problems.append(f"the token cannot be verified ({_first_line(error)})")
        result.failed = True
        return result
    result.verified = not result.failed
    return result
