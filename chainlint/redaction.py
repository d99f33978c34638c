"""The keyed hash of a redacted value: the profiler stores a redacted column's values under it,
and the estimator looks a literal of the code up the same way. It sits low in the layers so
that both reach it without the estimator importing the profiler."""

from __future__ import annotations

import hashlib
import hmac
from typing import Any


def redact_value(key: bytes, value: Any) -> str:
    """The keyed hash under which a redacted value is stored and a literal is looked up."""
    return "h:" + hmac.new(key, repr(value).encode("utf-8", "surrogatepass"), hashlib.sha256).hexdigest()[:16]
