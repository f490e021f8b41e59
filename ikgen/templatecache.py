"""Compiled templates kept between runs: jinja2's file-system bytecode cache, made safe to use.

Compiling the templates (the C source alone is about 900 lines of template) took about 0.5 s of
every `ikgen generate` run. jinja2 can keep the compiled code in a private per-user folder
(``<tmp>/_jinja2-cache-<uid>``, mode 0700, refused when someone else owns it) and reuses it while
the template's source is unchanged (a checksum of the source is stored beside it). The file name
also holds a digest of everything else the compiled code depends on: the environment's settings,
the jinja2 version and the Python version. The cache only saves time: the rendered text is the
same with or without it; when the folder cannot be made or written, templates are compiled as
before. ``IKGEN_TEMPLATE_CACHE=off`` turns it off.
"""

from __future__ import annotations

import hashlib
import os
import sys

import jinja2
from jinja2.bccache import Bucket, FileSystemBytecodeCache


class QuietCache(FileSystemBytecodeCache):
    """A cache whose read or write errors (a full disk, a folder removed meanwhile) are a miss."""

    def load_bytecode(self, bucket: Bucket) -> None:
        try:
            super().load_bytecode(bucket)
        except OSError:
            bucket.reset()

    def dump_bytecode(self, bucket: Bucket) -> None:
        try:
            super().dump_bytecode(bucket)
        except OSError:
            pass


def template_cache(settings: str) -> jinja2.BytecodeCache | None:
    """The bytecode cache for an environment described by ``settings`` (its options in words), or
    None when it is turned off or no private folder can be had."""
    if os.environ.get("IKGEN_TEMPLATE_CACHE", "").lower() in ("off", "0", "no"):
        return None
    tag = hashlib.sha256(f"{settings}|jinja2 {jinja2.__version__}|{sys.version}".encode()).hexdigest()[:16]
    try:
        return QuietCache(pattern=f"__ikgen_{tag}_%s.cache")
    except (OSError, RuntimeError):     # no safe temporary folder (jinja2 says RuntimeError)
        return None
