"""API key digests: how a key is stored in the settings, and a small tool to make keys.

A key is stored only as ``sha256:`` followed by the hex SHA-256 digest of its UTF-8
bytes. Keys made here are 256 random bits (``secrets.token_urlsafe(32)``), so an
unsalted digest is enough: a key cannot be guessed from its digest, and the service never
needs the key itself.

``python -m service.web.access_keys new`` prints a new key and its digest;
``python -m service.web.access_keys digest`` reads keys from standard input, one per line,
and prints each one's digest.
"""

from __future__ import annotations

import hashlib
import secrets
import sys


def digest(key: str) -> str:
    """The settings form of ``key``.

    The example is the "abc" test vector of FIPS 180-2, appendix B.1.

    >>> digest("abc")
    'sha256:ba7816bf8f01cfea414140de5dae2223b00361a396177a9cb410ff61f20015ad'
    """
    return "sha256:" + hashlib.sha256(key.encode("utf-8")).hexdigest()


def new_key() -> str:
    """A new random key, 43 URL-safe characters."""
    return secrets.token_urlsafe(32)


def main(argv: list[str]) -> int:
    if argv == ["new"]:
        key = new_key()
        print(f"key:    {key}\ndigest: {digest(key)}")
        return 0
    if argv == ["digest"]:
        for line in sys.stdin:
            if line.strip():
                print(digest(line.strip()))
        return 0
    print("usage: python -m service.web.access_keys new | digest < keys.txt", file=sys.stderr)
    return 2


if __name__ == "__main__":
    raise SystemExit(main(sys.argv[1:]))
