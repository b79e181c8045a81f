"""Erasure shard sets never reach outside their directories.

A manifest naming a shard path outside its directory (``../x``, an absolute path, a
path through a symbolic link to a directory) or a shard that is a symbolic link must be
refused with ``InputError`` before anything is read or written; ``decode`` writes only
its ``--out`` file (through a hidden temporary beside it) and ``repair`` only inside the
shard directory. Each test takes a snapshot of the whole temporary tree (every entry,
symbolic links as links, file contents by SHA-256 from Python's hashlib, the standard
library's FIPS 180-4 implementation) before and after, and compares.
"""

import hashlib
import json
import os

import pytest
from click.testing import CliRunner

from gfla.errors import InputError
from gfla.jobs.erasure import (decode_file, encode_file, erasure_code, load_manifest,
                               repair_shards, verify_shards)
from gfla.jobs.erasure.manifest import canonical_digest, manifest_text

DATA = bytes(range(256)) * 7 + b"tail of an invented ledger"


def snapshot(root):
    """{relative path: description} of every entry under root, links not followed."""
    out = {}
    for directory, dirs, files in os.walk(root, followlinks=False):
        for name in dirs + files:
            path = os.path.join(directory, name)
            rel = os.path.relpath(path, root)
            if os.path.islink(path):
                out[rel] = ("link", os.readlink(path))
            elif os.path.isdir(path):
                out[rel] = ("dir",)
            else:
                with open(path, "rb") as fh:
                    out[rel] = ("file", hashlib.sha256(fh.read()).hexdigest())
    return out


@pytest.fixture
def shard_set(tmp_path):
    """tmp/set (a 3 + 2 shard set of DATA), tmp/outside/victim.bin, tmp/out/."""
    (tmp_path / "in.bin").write_bytes(DATA)
    encode_file(tmp_path / "in.bin", tmp_path / "set", erasure_code("GF(2^8)", 3, 2))
    (tmp_path / "outside").mkdir()
    (tmp_path / "outside" / "victim.bin").write_bytes(b"not a shard")
    (tmp_path / "out").mkdir()
    return tmp_path


def reseal(directory, edit):
    """Edit the manifest and recompute its self-checksum, so only the path checks can
    refuse it."""
    path = os.path.join(directory, "manifest.json")
    with open(path) as fh:
        body = json.load(fh)
    edit(body)
    body.pop("manifest_sha256", None)
    body["manifest_sha256"] = canonical_digest(body)
    with open(path, "w") as fh:
        fh.write(manifest_text(body))


def _calls(root):
    return [
        ("verify", lambda: verify_shards(root / "set")),
        ("decode", lambda: decode_file(root / "set", root / "out" / "restored.bin")),
        ("repair", lambda: repair_shards(root / "set")),
    ]


def _assert_refused_and_untouched(root, match):
    before = snapshot(root)
    for name, call in _calls(root):
        with pytest.raises(InputError, match=match):
            call()
        assert snapshot(root) == before, f"{name} changed the tree"


@pytest.mark.parametrize("name", [
    "../outside/victim.bin", "../../x.bin", "..", ".", "sub/../shard-00.bin",
    "outside\\victim.bin", ".shard-00.bin", "manifest.json", "shard\x00.bin",
])
def test_relative_escapes_refused(shard_set, name):
    # The shard to be "repaired" is deleted first, so a repair that followed the name
    # would write there.
    os.unlink(shard_set / "set" / "shard-01.bin")
    reseal(shard_set / "set", lambda b: b["shards"][1].update(file=name))
    _assert_refused_and_untouched(shard_set, "not a plain name")
    assert (shard_set / "outside" / "victim.bin").read_bytes() == b"not a shard"


def test_absolute_path_refused(shard_set):
    victim = str(shard_set / "outside" / "victim.bin")
    reseal(shard_set / "set", lambda b: b["shards"][0].update(file=victim))
    _assert_refused_and_untouched(shard_set, "not a plain name")
    os.unlink(victim)
    reseal(shard_set / "set", lambda b: b["shards"][0].update(file=victim))
    _assert_refused_and_untouched(shard_set, "not a plain name")
    assert not os.path.exists(victim)


def test_symlink_shard_pointing_outside_refused(shard_set):
    # A shard replaced by a link to a file outside; and a link to a file that does not
    # exist yet (a repair that followed it would create the file outside).
    os.unlink(shard_set / "set" / "shard-02.bin")
    os.symlink(shard_set / "outside" / "victim.bin", shard_set / "set" / "shard-02.bin")
    _assert_refused_and_untouched(shard_set, "symbolic link")
    os.unlink(shard_set / "set" / "shard-02.bin")
    os.symlink(shard_set / "outside" / "new.bin", shard_set / "set" / "shard-02.bin")
    _assert_refused_and_untouched(shard_set, "symbolic link")
    assert not os.path.lexists(shard_set / "outside" / "new.bin")


def test_path_through_symlinked_directory_refused(shard_set):
    # set/sub is a link to outside/; a shard named sub/shard-01.bin would live there.
    os.symlink(shard_set / "outside", shard_set / "set" / "sub")
    os.rename(shard_set / "set" / "shard-01.bin", shard_set / "outside" / "shard-01.bin")
    reseal(shard_set / "set", lambda b: b["shards"][1].update(file="sub/shard-01.bin"))
    _assert_refused_and_untouched(shard_set, "not a plain name")


def test_manifest_names_checked_before_anything_is_read(shard_set, monkeypatch):
    # The refusal comes from the manifest alone: no shard file is opened.
    opened = []
    real_open = os.open

    def watching_open(path, *args, **kwargs):
        opened.append(os.fspath(path))
        return real_open(path, *args, **kwargs)

    reseal(shard_set / "set", lambda b: b["shards"][3].update(file="../outside/victim.bin"))
    monkeypatch.setattr(os, "open", watching_open)
    with pytest.raises(InputError, match="not a plain name"):
        decode_file(shard_set / "set", shard_set / "out" / "restored.bin")
    with pytest.raises(InputError, match="not a plain name"):
        repair_shards(shard_set / "set")
    assert not [p for p in opened if "shard-" in p or "victim" in p or "restored" in p]


def test_decode_writes_only_its_output(shard_set):
    os.unlink(shard_set / "set" / "shard-00.bin")           # a data shard is rebuilt
    before = snapshot(shard_set)
    result = decode_file(shard_set / "set", shard_set / "out" / "restored.bin")
    after = snapshot(shard_set)
    added = {k: v for k, v in after.items() if k not in before}
    assert {k: v for k, v in before.items() if after.get(k) != v} == {}
    assert list(added) == [os.path.join("out", "restored.bin")]
    assert (shard_set / "out" / "restored.bin").read_bytes() == DATA
    assert result["sha256"] == hashlib.sha256(DATA).hexdigest()


def test_decode_output_link_or_existing_file_refused(shard_set):
    # --out naming a dangling link to a file outside, or an existing file: refused, and
    # the link's target is not created.
    os.symlink(shard_set / "outside" / "planted.bin", shard_set / "out" / "restored.bin")
    before = snapshot(shard_set)
    with pytest.raises(InputError, match="already exists"):
        decode_file(shard_set / "set", shard_set / "out" / "restored.bin")
    assert snapshot(shard_set) == before
    assert not os.path.lexists(shard_set / "outside" / "planted.bin")
    with pytest.raises(InputError, match="already exists"):
        decode_file(shard_set / "set", shard_set / "outside" / "victim.bin")
    assert (shard_set / "outside" / "victim.bin").read_bytes() == b"not a shard"


def test_repair_writes_only_inside_the_shard_directory(shard_set):
    os.unlink(shard_set / "set" / "shard-01.bin")
    with open(shard_set / "set" / "shard-03.bin", "r+b") as fh:
        fh.write(b"\xff\xfe")
    before = snapshot(shard_set)
    result = repair_shards(shard_set / "set")
    after = snapshot(shard_set)
    changed = sorted(k for k in set(before) | set(after) if before.get(k) != after.get(k))
    assert changed == [os.path.join("set", "shard-01.bin"), os.path.join("set", "shard-03.bin"),
                       os.path.join("set", "shard-03.bin.damaged")]
    assert result["repaired"] == [1, 3]
    assert verify_shards(shard_set / "set")["intact"] == [0, 1, 2, 3, 4]


def test_repair_through_a_linked_directory_stays_in_the_target(shard_set):
    # DIR given as a link to the shard directory: the writes land in the directory the
    # link names, nowhere else.
    os.symlink(shard_set / "set", shard_set / "set-link")
    os.unlink(shard_set / "set" / "shard-04.bin")
    before = snapshot(shard_set)
    repair_shards(shard_set / "set-link")
    after = snapshot(shard_set)
    changed = sorted(k for k in set(before) | set(after) if before.get(k) != after.get(k))
    assert changed == [os.path.join("set", "shard-04.bin")]


def test_shard_turned_into_a_link_after_loading_is_not_followed(shard_set, monkeypatch):
    # The manifest is checked, then (a race) a missing shard appears as a link to a file
    # outside: the shards are opened without following links, so repair refuses and
    # neither the link nor its target is written.
    import gfla.jobs.erasure.shards as shards

    os.unlink(shard_set / "set" / "shard-02.bin")
    real_load = shards.load_manifest

    def load_then_plant(directory):
        manifest = real_load(directory)
        os.symlink(shard_set / "outside" / "victim.bin", shard_set / "set" / "shard-02.bin")
        return manifest

    monkeypatch.setattr(shards, "load_manifest", load_then_plant)
    with pytest.raises(InputError, match="symbolic link"):
        repair_shards(shard_set / "set")
    assert (shard_set / "outside" / "victim.bin").read_bytes() == b"not a shard"
    assert os.path.islink(shard_set / "set" / "shard-02.bin")
    assert not [n for n in os.listdir(shard_set / "set") if "partial" in n]


def test_cli_refuses_escapes_with_exit_code_2(shard_set):
    from gfla.cli.main import cli

    reseal(shard_set / "set", lambda b: b["shards"][1].update(file="../outside/victim.bin"))
    before = snapshot(shard_set)
    runner = CliRunner()
    for argv in (["erasure", "verify", str(shard_set / "set")],
                 ["erasure", "decode", str(shard_set / "set"), "--out",
                  str(shard_set / "out" / "r.bin"), "-q"],
                 ["erasure", "repair", str(shard_set / "set"), "-q"]):
        result = runner.invoke(cli, argv)
        assert result.exit_code == 2, (argv, result.output)
        lines = [ln for ln in result.output.splitlines() if ln.strip()]
        assert len(lines) == 1 and "not a plain name" in lines[0], result.output
    assert snapshot(shard_set) == before


def test_valid_set_loads(shard_set):
    # The checks above refuse only what they should: the untouched set loads.
    assert [s.file for s in load_manifest(shard_set / "set").shards] == [
        f"shard-0{i}.bin" for i in range(5)]
