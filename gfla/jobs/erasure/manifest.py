"""The manifest of an encoded shard set: ``manifest.json`` beside the shard files.

Layout (JSON object, written with sorted keys)::

    {
      "format": "gfla-erasure-set",
      "format_version": 1,
      "code": {"field": "GF(2^8)", "modulus": 285, "construction": "vandermonde",
               "data_shards": 10, "parity_shards": 4, "symbol_bytes": 1,
               "generator_sha256": "..."},
      "original": {"name": "ledger.tar", "length": 123456, "sha256": "..."},
      "layout": "contiguous",
      "shard_size": 12346,
      "shards": [{"index": 0, "role": "data", "file": "shard-00.bin", "sha256": "..."},
                 ...],
      "manifest_sha256": "..."
    }

``layout: contiguous`` means data shard d holds bytes ``d * shard_size`` up to
``(d + 1) * shard_size`` of the original, the last ones padded with zero bytes; parity
shard p holds ``G[p] @ data`` symbol by symbol. ``manifest_sha256`` is the SHA-256 of the
canonical JSON text (sorted keys, no spaces, ASCII) of every other key, so an edited or
damaged manifest is caught before any shard is trusted.

Shard file names are plain names inside the manifest's directory: no path separators,
no ``..``, no leading dot, not absolute; a shard that is a symbolic link is refused.
"""

import hashlib
import json
import numbers
import os
import re
import stat
from dataclasses import dataclass

from ...errors import InputError, file_error

__all__ = ["MANIFEST_NAME", "FORMAT", "FORMAT_VERSION", "Manifest", "ShardEntry",
           "shard_file_name", "shard_size_for", "build_manifest", "manifest_text",
           "load_manifest", "parse_manifest", "canonical_digest", "check_shard_name"]

MANIFEST_NAME = "manifest.json"
FORMAT = "gfla-erasure-set"
FORMAT_VERSION = 1
LAYOUT = "contiguous"
# A manifest of 65536 shards is about 10 MiB; anything far larger is not ours.
MAX_MANIFEST_BYTES = 64 << 20

_HEX64 = re.compile(r"[0-9a-f]{64}")
# File names are at most 255 bytes on common POSIX file systems (NAME_MAX); a shard's
# temporary name (.NAME.gfla-partial-XXXXXXXX) and set-aside name (NAME.damaged.N)
# must fit too, so shard names are kept well below.
_MAX_NAME_BYTES = 200


@dataclass(frozen=True)
class ShardEntry:
    index: int
    role: str  # "data" or "parity"
    file: str
    sha256: str


@dataclass(frozen=True)
class Manifest:
    """A validated manifest and the code it names."""

    directory: str
    code: object  # ErasureCode
    original_name: str
    original_length: int
    original_sha256: str
    shard_size: int
    shards: tuple  # of ShardEntry, by index

    def path(self, entry):
        return os.path.join(self.directory, entry.file)


def shard_file_name(index, n):
    """``shard-07.bin``: zero-padded index, at least two digits."""
    width = max(2, len(str(n - 1)))
    return f"shard-{index:0{width}d}.bin"


def shard_size_for(length, k, symbol_bytes):
    """Bytes per shard: ceil(length / k), rounded up to a whole symbol."""
    size = -(-int(length) // k)
    return -(-size // symbol_bytes) * symbol_bytes


def canonical_digest(body):
    text = json.dumps(body, sort_keys=True, separators=(",", ":"), ensure_ascii=True)
    return hashlib.sha256(text.encode("ascii")).hexdigest()


def build_manifest(code, original_name, original_length, original_sha256, shard_size,
                   shard_hashes):
    """The manifest dict (with its self-checksum) for a freshly encoded set."""
    body = {
        "format": FORMAT,
        "format_version": FORMAT_VERSION,
        "code": code.describe(),
        "original": {"name": original_name, "length": int(original_length),
                     "sha256": original_sha256},
        "layout": LAYOUT,
        "shard_size": int(shard_size),
        "shards": [{"index": i, "role": "data" if i < code.k else "parity",
                    "file": shard_file_name(i, code.n), "sha256": shard_hashes[i]}
                   for i in range(code.n)],
    }
    body["manifest_sha256"] = canonical_digest(body)
    return body


def manifest_text(body):
    return json.dumps(body, sort_keys=True, indent=1, ensure_ascii=True) + "\n"


def check_shard_name(name, where):
    """Refuse a shard file name that could point outside the manifest's directory."""
    if not isinstance(name, str) or not name:
        raise InputError(f"{where}: file name must be a non-empty string")
    shown = repr(name) if len(name) <= 40 else repr(name[:36] + "...")
    if ("/" in name or "\\" in name or "\0" in name or name in (".", "..")
            or name.startswith(".") or os.path.isabs(name)
            or os.path.basename(name) != name or name == MANIFEST_NAME):
        raise InputError(f"{where}: file name {shown} is not a plain name inside the "
                         f"shard directory; refused")
    if any(ord(c) < 32 or ord(c) == 127 for c in name):
        raise InputError(f"{where}: file name {shown} holds control characters; refused")
    try:
        encoded = os.fsencode(name)
    except UnicodeEncodeError:
        raise InputError(f"{where}: file name {shown} cannot be written in the file "
                         f"system's encoding; refused") from None
    if len(encoded) > _MAX_NAME_BYTES:
        raise InputError(f"{where}: file name of {len(encoded)} bytes is longer than the "
                         f"{_MAX_NAME_BYTES} a file name may have; refused")
    return name


# --------------------------------------------------------------------------- loading

def _need(obj, key, kind, where):
    if not isinstance(obj, dict) or key not in obj:
        raise InputError(f"{where}: missing {key!r}")
    value = obj[key]
    if kind is int:
        if isinstance(value, bool) or not isinstance(value, numbers.Integral):
            raise InputError(f"{where}: {key!r} must be an integer, got {value!r}")
        return int(value)
    if not isinstance(value, kind):
        raise InputError(f"{where}: {key!r} has the wrong type ({type(value).__name__})")
    return value


def _digest_field(obj, key, where):
    value = _need(obj, key, str, where)
    if not _HEX64.fullmatch(value):
        raise InputError(f"{where}: {key!r} is not a SHA-256 hex digest")
    return value


def load_manifest(directory):
    """Read and validate ``DIR/manifest.json``.

    Returns
    -------
    Manifest

    Raises
    ------
    InputError
        The directory or the manifest is missing; the manifest is not JSON, not ours,
        edited (self-checksum mismatch), names a code gfla cannot build or builds
        differently, or names a shard file outside the directory or a symbolic link.
    """
    directory = os.fspath(directory)
    if not os.path.exists(directory):
        raise InputError(f"{directory}: no such directory")
    if not os.path.isdir(directory):
        raise InputError(f"{directory}: not a directory")
    path = os.path.join(directory, MANIFEST_NAME)
    where = path
    try:
        st = os.stat(path)
    except FileNotFoundError:
        raise InputError(f"{directory}: no {MANIFEST_NAME} here (not an encoded shard "
                         f"directory)") from None
    if not stat.S_ISREG(st.st_mode):
        raise InputError(f"{where}: not a regular file")
    if st.st_size > MAX_MANIFEST_BYTES:
        raise InputError(f"{where}: {st.st_size} bytes is far too large for a manifest")
    try:
        with open(path, "rb") as fh:
            raw = fh.read(st.st_size + 1)  # read(n) reserves n bytes up front: keep n small
    except (OSError, ValueError) as exc:
        raise file_error(path, exc) from None
    return parse_manifest(raw, directory, where)


def parse_manifest(raw, directory, where=None):
    """Validate the bytes of a manifest that lives in ``directory``.

    Parameters
    ----------
    raw : bytes
        The content of ``manifest.json``.
    directory : str
        The shard directory (shard paths are checked against it).
    where : str, optional
        How messages name the manifest (default ``DIR/manifest.json``).

    Returns
    -------
    Manifest

    Raises
    ------
    InputError
        As :func:`load_manifest`.
    """
    from .codes import FILE_FIELDS, erasure_code

    directory = os.fspath(directory)
    if where is None:
        where = os.path.join(directory, MANIFEST_NAME)
    if len(raw) > MAX_MANIFEST_BYTES:
        raise InputError(f"{where}: far too large for a manifest")
    try:
        body = json.loads(raw.decode("utf-8"))
    except UnicodeDecodeError:
        raise InputError(f"{where}: not UTF-8 text") from None
    except json.JSONDecodeError as exc:
        raise InputError(f"{where}: not valid JSON ({exc.msg} at line {exc.lineno}, "
                         f"column {exc.colno})") from None
    except RecursionError:
        raise InputError(f"{where}: not a manifest (JSON nested too deeply)") from None
    except ValueError:
        # Python refuses to read integers of more than 4300 digits from text.
        raise InputError(f"{where}: not a manifest (an integer of more than 4300 "
                         "digits)") from None
    if not isinstance(body, dict):
        raise InputError(f"{where}: the top level must be a JSON object")
    if body.get("format") != FORMAT:
        raise InputError(f"{where}: not a gfla erasure manifest (format is "
                         f"{body.get('format')!r}, expected {FORMAT!r})")
    version = _need(body, "format_version", int, where)
    if version != FORMAT_VERSION:
        raise InputError(f"{where}: format version {version} is not supported "
                         f"(this gfla reads version {FORMAT_VERSION})")
    recorded = _digest_field(body, "manifest_sha256", where)
    rest = {key: value for key, value in body.items() if key != "manifest_sha256"}
    if canonical_digest(rest) != recorded:
        raise InputError(f"{where}: manifest was edited or damaged (its manifest_sha256 "
                         f"does not match its content); refused")

    code_part = _need(body, "code", dict, where)
    cwhere = f"{where}: code"
    field_spec = _need(code_part, "field", str, cwhere)
    if field_spec not in FILE_FIELDS:
        raise InputError(f"{cwhere}: field {field_spec!r} is not one of "
                         f"{', '.join(FILE_FIELDS)}")
    modulus = _need(code_part, "modulus", int, cwhere)
    construction = _need(code_part, "construction", str, cwhere)
    k = _need(code_part, "data_shards", int, cwhere)
    m = _need(code_part, "parity_shards", int, cwhere)
    symbol_bytes = _need(code_part, "symbol_bytes", int, cwhere)
    generator_digest = _digest_field(code_part, "generator_sha256", cwhere)
    try:
        code = erasure_code(field_spec, k, m, construction, modulus=modulus)
    except InputError as exc:
        raise InputError(f"{cwhere}: {exc}") from None
    if symbol_bytes != code.symbol_bytes:
        raise InputError(f"{cwhere}: symbol_bytes {symbol_bytes} does not match "
                         f"{field_spec}")
    if code.generator_sha256() != generator_digest:
        raise InputError(f"{cwhere}: the recorded generator (sha256 {generator_digest[:12]}...) "
                         f"is not the one gfla builds for {field_spec}, {construction}, "
                         f"k = {k}, m = {m}; refused")

    original = _need(body, "original", dict, where)
    owhere = f"{where}: original"
    name = _need(original, "name", str, owhere)
    length = _need(original, "length", int, owhere)
    if length < 0:
        raise InputError(f"{owhere}: negative length {length}")
    original_sha256 = _digest_field(original, "sha256", owhere)
    if _need(body, "layout", str, where) != LAYOUT:
        raise InputError(f"{where}: layout {body['layout']!r} is not supported")
    shard_size = _need(body, "shard_size", int, where)
    expected = shard_size_for(length, k, code.symbol_bytes)
    if shard_size != expected:
        raise InputError(f"{where}: shard_size {shard_size} does not fit an original of "
                         f"{length} bytes over {k} data shards (expected {expected})")

    entries = _need(body, "shards", list, where)
    if len(entries) != code.n:
        raise InputError(f"{where}: {len(entries)} shard entries, the code has "
                         f"{code.n} shards")
    shards, names = [], set()
    for position, entry in enumerate(entries):
        swhere = f"{where}: shard entry {position}"
        index = _need(entry, "index", int, swhere)
        if index != position:
            raise InputError(f"{swhere}: index {index}, expected {position}")
        role = _need(entry, "role", str, swhere)
        if role != ("data" if index < k else "parity"):
            raise InputError(f"{swhere}: role {role!r} does not match index {index}")
        file_name = check_shard_name(_need(entry, "file", str, swhere), swhere)
        if file_name in names:
            raise InputError(f"{swhere}: file {file_name!r} is named twice")
        names.add(file_name)
        digest = _digest_field(entry, "sha256", swhere)
        shard_path = os.path.join(directory, file_name)
        if os.path.islink(shard_path):
            raise InputError(f"{shard_path}: shard file is a symbolic link; refused")
        shards.append(ShardEntry(index, role, file_name, digest))
    return Manifest(directory, code, name, length, original_sha256, shard_size,
                    tuple(shards))
