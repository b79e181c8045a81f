"""The erasure-coding part of ``gfla demo``: an invented archive over 14 disks.

The Fennick Bay tide-gauge archive (invented: the place, the gauge and every reading
are made up for this tour) is one text file spread over 14 disks as k = 10 data shards
and m = 4 parity shards over GF(2^8). Four disks fail in different ways: two are dead,
one returns scrambled sectors, one comes back truncated. The demo encodes the file for
real (temporary directory), breaks the four shards, lets ``verify`` find them, shows the
decoding matrix, rebuilds the file and compares its SHA-256 with the original's, then
repairs the four shards.

Nothing here is a reference value; the checks the project relies on are in the tests.
"""

import hashlib
import os
import tempfile

__all__ = ["demo_section", "format_text", "ARCHIVE_NAME", "FAILURES"]

ARCHIVE_NAME = "fennick-bay-tides.txt"
K, M = 10, 4
# disk (= shard index) -> how it fails
FAILURES = {1: "dead", 4: "dead", 9: "scrambled", 12: "truncated"}
_WHAT = {"dead": "disk dead, shard file gone",
         "scrambled": "disk returns scrambled sectors",
         "truncated": "disk comes back with a truncated shard"}


def invented_archive(readings=1500):
    """The invented tide log: deterministic text, about 40 KB."""
    lines = ["FENNICK BAY TIDE GAUGE ARCHIVE (invented for the gfla demo)",
             "station; reading; height_cm; water_temp_dC"]
    state = 0x2545F491
    for i in range(readings):
        state = (state * 1103515245 + 12345) % (1 << 31)  # a fixed invented sequence
        height = 180 + (i * 37) % 240 - 120 + state % 17
        temp = 60 + (state >> 8) % 90
        lines.append(f"gauge-{1 + i % 3}; {i:05d}; {height:4d}; {temp:3d}")
    return ("\n".join(lines) + "\n").encode("ascii")


def _break_shards(directory, manifest):
    for disk, how in FAILURES.items():
        path = os.path.join(directory, manifest["shards"][disk]["file"])
        if how == "dead":
            os.unlink(path)
        elif how == "scrambled":
            with open(path, "r+b") as fh:
                block = bytearray(fh.read(64))
                fh.seek(0)
                fh.write(bytes(b ^ 0xA5 for b in block))
        else:
            with open(path, "r+b") as fh:
                fh.truncate(os.path.getsize(path) // 3)


def demo_section(json_mode=False):
    """Run the scenario; returns a dict (JSON-ready).

    Parameters
    ----------
    json_mode : bool
        When False, the dict also carries ``decoding_matrix_hex`` (rows of two-digit hex
        strings) for :func:`format_text`; the JSON form keeps plain integers only.
    """
    from .codes import erasure_code
    from .shards import decode_file, encode_file, repair_shards, verify_shards

    code = erasure_code("GF(2^8)", K, M, "vandermonde")
    payload = invented_archive()
    original_sha256 = hashlib.sha256(payload).hexdigest()
    with tempfile.TemporaryDirectory(prefix="gfla-demo-") as work:
        source = os.path.join(work, ARCHIVE_NAME)
        with open(source, "wb") as fh:
            fh.write(payload)
        shard_dir = os.path.join(work, "disks")
        encoded = encode_file(source, shard_dir, code, chunk_size=4096)
        manifest = encoded["manifest"]
        _break_shards(shard_dir, manifest)
        seen = verify_shards(shard_dir)
        rebuilt_path = os.path.join(work, "rebuilt-" + ARCHIVE_NAME)
        decoded = decode_file(shard_dir, rebuilt_path, chunk_size=4096)
        with open(rebuilt_path, "rb") as fh:
            rebuilt = fh.read()
        repaired = repair_shards(shard_dir, chunk_size=4096)
        after = verify_shards(shard_dir)
    rebuilt_sha256 = hashlib.sha256(rebuilt).hexdigest()
    status = {row["index"]: row for row in seen["shards"]}
    section = {
        "name": "erasure",
        "title": "Fennick Bay tide archive: 14 disks, four fail",
        "story": ("The Fennick Bay tide-gauge archive (invented) is one file spread over 14 "
                  "disks: disks 0-9 hold the 10 data shards, disks 10-13 four parity "
                  "shards of a systematic Vandermonde code over GF(2^8). Disks 1 and 4 die, "
                  "disk 9 returns scrambled sectors and disk 12 comes back truncated. "
                  "verify finds all four by size and SHA-256; the first 10 intact disks "
                  "are read and the decoding matrix rebuilds the lost shards."),
        "invented": True,
        "code": code.describe(),
        "disks": code.n,
        "archive": {"name": ARCHIVE_NAME, "length": len(payload), "sha256": original_sha256},
        "shard_size": manifest["shard_size"],
        "failures": [{"disk": disk, "failure": _WHAT[how],
                      "verify_status": status[disk]["status"],
                      "verify_detail": status[disk]["detail"]}
                     for disk, how in FAILURES.items()],
        "verify": {"intact": seen["intact"], "missing": seen["missing"],
                   "corrupt": seen["corrupt"]},
        "read": decoded["read"],
        "rebuild": decoded["rebuilt"],
        "decoding_matrix": decoded["decoding_matrix"],
        "rebuilt": {"length": len(rebuilt), "sha256": rebuilt_sha256,
                    "matches_original": rebuilt == payload
                    and rebuilt_sha256 == original_sha256},
        "repair": {"repaired": repaired["repaired"],
                   "all_intact_after": not after["missing"] and not after["corrupt"]},
    }
    plan = code.decoding_plan(sorted(FAILURES))  # all four lost shards, parity included
    section["decoding_matrix_all"] = {"rebuild": list(plan.targets),
                                      "matrix": [[int(v) for v in row] for row in plan.matrix]}
    if not json_mode:
        section["decoding_matrix_hex"] = [[f"{int(v):02x}" for v in row]
                                          for row in plan.matrix]
    return section


def format_text(d):
    """The section as readable text."""
    lines = [f"== {d['title']} ==",
             f"field: {d['code']['field']}, modulus 0x{d['code']['modulus']:x}; "
             f"k = {d['code']['data_shards']}, m = {d['code']['parity_shards']} "
             f"({d['code']['construction']})",
             d["story"],
             f"archive: {d['archive']['name']}, {d['archive']['length']} bytes, "
             f"shard size {d['shard_size']} bytes",
             "failures (as verify reports them):"]
    for f in d["failures"]:
        lines.append(f"  disk {f['disk']:>2}: {f['failure']:<40} -> {f['verify_status']} "
                     f"({f['verify_detail']})")
    rows = d.get("decoding_matrix_hex") or [[f"{v:02x}" for v in row]
                                            for row in d["decoding_matrix_all"]["matrix"]]
    read = d["read"]
    lines.append(f"disks read: {' '.join(map(str, read))}")
    lines.append("decoding matrix (hex; row = lost disk, columns = disks read):")
    lines.append("          " + " ".join(f"{r:>2}" for r in read))
    for target, row in zip(d["decoding_matrix_all"]["rebuild"], rows):
        role = "data" if target < d["code"]["data_shards"] else "parity"
        lines.append(f"  {role:<6} {target:>2}: " + " ".join(row))
    lines.append(f"original sha256: {d['archive']['sha256']}")
    lines.append(f"rebuilt  sha256: {d['rebuilt']['sha256']}")
    lines.append("rebuilt file equals the original: "
                 + ("yes" if d["rebuilt"]["matches_original"] else "NO"))
    lines.append(f"repaired disks {' '.join(map(str, d['repair']['repaired']))}; all 14 "
                 f"shards intact afterwards: "
                 + ("yes" if d["repair"]["all_intact_after"] else "NO"))
    return "\n".join(lines)
