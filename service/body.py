"""Read a request body as JSON, refusing what is not JSON, too large, or malformed.

The size cap is checked on the declared ``Content-Length`` before anything is
read, and again while reading: a chunked upload has no length, and a server
that terminates the stream itself (gunicorn) would otherwise hand over a body
cut at the cap without a word. So at most ``limit + 1`` bytes are read, and
one byte past the cap is a 413.
"""

from __future__ import annotations

import json
import logging
from typing import Any

from flask import request
from werkzeug.exceptions import RequestEntityTooLarge

from service.errors import MalformedJson, UnsupportedContentType

logger = logging.getLogger(__name__)

__all__ = ["read_json", "read_capped"]

_CHUNK = 64 * 1024


def read_capped(stream: Any, limit: int) -> bytes:
    """Read ``stream`` to its end; raise RequestEntityTooLarge as soon as it passes ``limit`` bytes."""
    parts: list[bytes] = []
    size = 0
    while True:
        chunk = stream.read(min(_CHUNK, limit + 1 - size))
        if not chunk:
            return b"".join(parts)
        parts.append(chunk)
        size += len(chunk)
        if size > limit:
            raise RequestEntityTooLarge()


def _reject_constant(name: str) -> Any:
    raise ValueError(f"{name} is not a JSON number")


def read_json(limit: int) -> Any:
    """Return the request body parsed as JSON (415, 413 and 400 errors as described above)."""
    mimetype = request.mimetype
    if mimetype != "application/json" and not (mimetype.startswith("application/") and mimetype.endswith("+json")):
        raise UnsupportedContentType(
            f"the body must be JSON sent as 'Content-Type: application/json' (got {mimetype or 'none'!r})",
            "Content-Type")
    charset = request.mimetype_params.get("charset", "utf-8").lower()
    if charset not in ("utf-8", "utf8"):
        raise UnsupportedContentType(f"JSON must be UTF-8 (got charset {charset!r})", "Content-Type")
    length = request.content_length
    if length is not None and length > limit:
        raise RequestEntityTooLarge()
    raw = read_capped(request.stream, limit)
    if not raw.strip():
        raise MalformedJson("the body is empty; send the job request as a JSON object")
    try:
        return json.loads(raw.decode("utf-8"), parse_constant=_reject_constant)
    except UnicodeDecodeError:
        raise MalformedJson("the body is not valid UTF-8") from None
    except RecursionError:
        raise MalformedJson("the JSON is nested too deeply") from None
    except ValueError as err:  # JSONDecodeError, and NaN/Infinity refused above
        where = f" at line {err.lineno} column {err.colno}" if isinstance(err, json.JSONDecodeError) else ""
        message = err.msg if isinstance(err, json.JSONDecodeError) else str(err)
        raise MalformedJson(f"the body is not valid JSON: {message}{where}") from None
