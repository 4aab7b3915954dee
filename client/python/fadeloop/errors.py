"""Exceptions raised by the fadeloop client.

A call the server rejects raises a subclass of :class:`FadeloopError` that
keeps the gRPC status code and message; a rejected request
(``INVALID_ARGUMENT``) raises :class:`InvalidRequest`, whose ``violations``
are the server's field violations (``google.rpc.BadRequest``), each a
:class:`FieldViolation` of a field path (``scenario.groups[0].count``) and
the rule it broke.
"""
from __future__ import annotations

from dataclasses import dataclass
from typing import List, Optional, Tuple

import grpc

__all__ = [
    "FadeloopError", "InvalidRequest", "ResourceExhausted", "Unavailable",
    "DeadlineExceeded", "Cancelled", "FieldViolation", "from_rpc_error",
]


@dataclass(frozen=True)
class FieldViolation:
    """One broken rule: the request field path and the rule's description."""
    field: str
    description: str

    def __str__(self) -> str:
        return f"{self.field}: {self.description}"


class FadeloopError(Exception):
    """A call that failed: ``code`` (a grpc.StatusCode) and the server's message."""

    def __init__(self, code: grpc.StatusCode, message: str):
        super().__init__(f"{code.name}: {message}")
        self.code = code
        self.message = message


class InvalidRequest(FadeloopError):
    """The server rejected the request; ``violations`` names every field problem."""

    def __init__(self, code: grpc.StatusCode, message: str, violations: List[FieldViolation]):
        super().__init__(code, message)
        self.violations = violations

    def __str__(self) -> str:
        if not self.violations:
            return super().__str__()
        return "invalid request:\n" + "\n".join("  " + str(v) for v in self.violations)


class ResourceExhausted(FadeloopError):
    """Too much work for one call (the cost bound) or the server is busy;
    ``retry_after_s`` is the server's suggested delay when it gave one."""

    def __init__(self, code: grpc.StatusCode, message: str, retry_after_s: Optional[float]):
        super().__init__(code, message)
        self.retry_after_s = retry_after_s


class Unavailable(FadeloopError):
    """The server cannot be reached (or is draining)."""


class DeadlineExceeded(FadeloopError):
    """The call ran out of time."""


class Cancelled(FadeloopError):
    """The call was cancelled."""


# --- google.rpc.Status in the "grpc-status-details-bin" trailer -----------
# Decoded from the protobuf wire format here, so that no googleapis package
# is needed and no google.rpc message is registered in the default pool
# (where it could clash with googleapis-common-protos).

def _varint(b: bytes, i: int) -> Tuple[int, int]:
    shift = result = 0
    while True:
        if i >= len(b):
            raise ValueError("truncated varint")
        c = b[i]
        i += 1
        result |= (c & 0x7F) << shift
        if not c & 0x80:
            return result, i
        shift += 7


def _fields(b: bytes):
    """Yield (field number, wire type, value) of a serialised message;
    values of wire type 2 are bytes, of type 0 ints; others are skipped."""
    i = 0
    while i < len(b):
        key, i = _varint(b, i)
        num, wt = key >> 3, key & 7
        if wt == 0:
            v, i = _varint(b, i)
            yield num, wt, v
        elif wt == 2:
            n, i = _varint(b, i)
            yield num, wt, b[i:i + n]
            i += n
        elif wt == 1:
            i += 8
        elif wt == 5:
            i += 4
        else:
            raise ValueError(f"unsupported wire type {wt}")


def _details(status_bin: bytes):
    """(type_url, value) of each google.protobuf.Any in a google.rpc.Status."""
    for num, wt, v in _fields(status_bin):
        if num == 3 and wt == 2:
            url, value = "", b""
            for n2, w2, v2 in _fields(v):
                if n2 == 1 and w2 == 2:
                    url = v2.decode("utf-8", "replace")
                elif n2 == 2 and w2 == 2:
                    value = v2
            yield url, value


def _bad_request(value: bytes) -> List[FieldViolation]:
    out = []
    for num, wt, v in _fields(value):
        if num == 1 and wt == 2:
            field = desc = ""
            for n2, w2, v2 in _fields(v):
                if n2 == 1 and w2 == 2:
                    field = v2.decode("utf-8", "replace")
                elif n2 == 2 and w2 == 2:
                    desc = v2.decode("utf-8", "replace")
            out.append(FieldViolation(field, desc))
    return out


def _retry_delay(value: bytes) -> Optional[float]:
    # google.rpc.RetryInfo { google.protobuf.Duration retry_delay = 1; }
    for num, wt, v in _fields(value):
        if num == 1 and wt == 2:
            seconds = nanos = 0
            for n2, w2, v2 in _fields(v):
                if n2 == 1 and w2 == 0:
                    seconds = v2
                elif n2 == 2 and w2 == 0:
                    nanos = v2
            return seconds + nanos / 1e9
    return None


def from_rpc_error(err: grpc.RpcError) -> FadeloopError:
    """The FadeloopError for a failed gRPC call."""
    code = err.code() if hasattr(err, "code") else grpc.StatusCode.UNKNOWN
    message = err.details() if hasattr(err, "details") else str(err)
    violations: List[FieldViolation] = []
    retry = None
    trailers = err.trailing_metadata() if hasattr(err, "trailing_metadata") else None
    for key, value in trailers or ():
        if key != "grpc-status-details-bin":
            continue
        try:
            for url, v in _details(value):
                if url.endswith("/google.rpc.BadRequest"):
                    violations.extend(_bad_request(v))
                elif url.endswith("/google.rpc.RetryInfo"):
                    retry = _retry_delay(v)
        except ValueError:
            pass  # a malformed trailer: keep the status code and message
    if code == grpc.StatusCode.INVALID_ARGUMENT:
        return InvalidRequest(code, message or "", violations)
    if code == grpc.StatusCode.RESOURCE_EXHAUSTED:
        return ResourceExhausted(code, message or "", retry)
    if code == grpc.StatusCode.UNAVAILABLE:
        return Unavailable(code, message or "")
    if code == grpc.StatusCode.DEADLINE_EXCEEDED:
        return DeadlineExceeded(code, message or "")
    if code == grpc.StatusCode.CANCELLED:
        return Cancelled(code, message or "")
    return FadeloopError(code, message or "")
