"""Every value in a Redis database, of every key type, with the layers rq wraps around its own
(zlib, base64) taken off: what a test checks for pickles."""

from __future__ import annotations

import base64
import binascii
import io
import json
import pickletools
import zlib
from collections.abc import Iterator

from redis import Redis


def values(redis: Redis) -> Iterator[tuple[str, bytes]]:
    """(key, value) for every value held: strings, hash fields, list and set items, sorted-set
    members and stream entries' fields."""
    for key in redis.scan_iter(count=1000):
        name = key.decode() if isinstance(key, bytes) else str(key)
        kind = redis.type(key)
        kind = kind.decode() if isinstance(kind, bytes) else kind
        if kind == "string":
            yield name, redis.get(key)  # type: ignore[misc]
        elif kind == "hash":
            for field, value in redis.hgetall(key).items():  # type: ignore[union-attr]
                yield f"{name}[{field!r}]", value
        elif kind == "list":
            for value in redis.lrange(key, 0, -1):  # type: ignore[union-attr]
                yield name, value
        elif kind == "set":
            for value in redis.smembers(key):  # type: ignore[union-attr]
                yield name, value
        elif kind == "zset":
            for value, _ in redis.zrange(key, 0, -1, withscores=True):  # type: ignore[union-attr]
                yield name, value
        elif kind == "stream":
            for _, fields in redis.xrange(key):  # type: ignore[union-attr]
                for field, value in fields.items():
                    yield f"{name}[{field!r}]", value
        else:
            raise AssertionError(f"{name}: a key of type {kind} that the scan does not read")


def layers(value: bytes) -> list[bytes]:
    """The value and whatever it decodes to through zlib and base64, outermost first."""
    out = [value]
    try:
        out += layers(zlib.decompress(value))
    except zlib.error:
        pass
    if value and len(value) % 4 == 0:
        try:
            decoded = base64.b64decode(value, validate=True)
        except (binascii.Error, ValueError):
            decoded = b""
        if decoded and decoded != value:
            out += layers(decoded)
    return out


def is_pickle(value: bytes) -> bool:
    """Pickle protocol 2 and later start with the PROTO opcode (0x80); protocols 0 and 1 are
    caught by reading the bytes as pickle opcodes to a final STOP."""
    if value.startswith(b"\x80"):
        return True
    if not value.endswith(b"."):
        return False
    try:
        ops = list(pickletools.genops(io.BytesIO(value)))
    except Exception:  # noqa: BLE001 (not a pickle)
        return False
    return bool(ops) and ops[-1][0].name == "STOP"


def readable(value: bytes) -> bool:
    """JSON, or plain UTF-8 text (timestamps, states, names)."""
    try:
        text = value.decode("utf-8")
    except UnicodeDecodeError:
        return False
    try:
        json.loads(text)
    except ValueError:
        return text.isprintable() or all(c.isprintable() or c in "\n\t" for c in text)
    return True


def pickles_and_unreadable(redis: Redis) -> tuple[list[str], list[str], int]:
    """Keys holding a pickle at any layer; keys with no layer that is JSON or text; and how
    many values were read."""
    pickled, unreadable, count = [], [], 0
    for name, value in values(redis):
        count += 1
        seen = layers(value)
        if any(is_pickle(v) for v in seen):
            pickled.append(name)
        elif not any(readable(v) for v in seen):
            unreadable.append(name)
    return pickled, unreadable, count
