"""Operator codes are stored only as a keyed hash (HMAC-SHA256, truncated); the key stays local."""

from __future__ import annotations

import hashlib
import hmac
import os
import secrets
from pathlib import Path

KEY_ENV = "BREATHFLEET_OPERATOR_KEY"
DIGEST_CHARS = 16


def operator_key(key_file: str) -> bytes:
    """The key from env BREATHFLEET_OPERATOR_KEY, else the key file (created with mode 0600 if absent)."""
    env = os.environ.get(KEY_ENV)
    if env:
        return env.encode("utf-8")
    path = Path(key_file).expanduser()
    if not path.exists():
        path.parent.mkdir(parents=True, exist_ok=True)
        fd = os.open(path, os.O_WRONLY | os.O_CREAT | os.O_EXCL, 0o600)
        with os.fdopen(fd, "w") as fh:
            fh.write(secrets.token_hex(32) + "\n")
    return path.read_text(encoding="utf-8").strip().encode("utf-8")


def pseudonymise(code: str, key: bytes) -> str:
    """Keyed hash of one operator code: 'op-' + first 16 hex digits of HMAC-SHA256."""
    return "op-" + hmac.new(key, code.encode("utf-8"), hashlib.sha256).hexdigest()[:DIGEST_CHARS]
