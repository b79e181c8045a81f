"""Duplicate ids in JSON Lines inputs: the first record with an id runs, later ones are
error lines naming it; exact under hash collisions, across chunks, workers and resume.

The expected determinants are computed here by the 2 x 2 formula ad - bc mod p
(common practice), independent of gfla.
"""

import json

import numpy as np
import pytest

from gfla.jobs.batch import run
from gfla.jobs.batch.ids import IdRegistry
from gfla.jobs.batch.records import scan_ids


def _record(rid, a=1, b=2, c=3, d=4, op="det"):
    return {"id": rid, "field": "GF(7)", "op": op, "matrix": [[a, b], [c, d]]}


def _write(path, records):
    with open(path, "w") as fh:
        for rec in records:
            fh.write((rec if isinstance(rec, str) else json.dumps(rec)) + "\n")


def _read(path):
    with open(path) as fh:
        return [json.loads(line) for line in fh]


def _det7(a, b, c, d):
    return (a * d - b * c) % 7  # 2 x 2 determinant formula (common practice)


def test_later_records_with_an_id_seen_before_are_error_lines(tmp_path):
    inp, out = tmp_path / "in.jsonl", tmp_path / "out.jsonl"
    _write(inp, [_record("a"), _record(1), _record("1"), _record("a", d=5), "",
                 _record("a", op="frobnicate"), _record("\u00e9"), _record("\u00e9"),
                 "not json", {"id": 1, "op": "det"}])
    summary = run(str(inp), str(out))
    got = _read(out)
    assert [g["id"] for g in got] == ["a", 1, "1", "a", "a", "\u00e9", "\u00e9", None, 1]
    assert [g.get("result") for g in got[:3]] == [_det7(1, 2, 3, 4)] * 3
    dup = [(g["line"], g["error"]["message"]) for g in got if "duplicate" in
           g.get("error", {}).get("message", "")]
    assert dup == [
        (4, 'duplicate id "a": the record on line 1 has the same id, so this one is not run'),
        (6, 'duplicate id "a": the record on line 1 has the same id, so this one is not run'),
        (8, 'duplicate id "\\u00e9": the record on line 7 has the same id, so this one is '
            'not run'),
        (10, "duplicate id 1: the record on line 2 has the same id, so this one is not run")]
    assert summary.records == 9 and summary.failed == 5
    assert summary.kinds == {"InputError": 5}
    assert summary.exit_code == 1


def test_no_id_check_runs_every_record(tmp_path):
    inp, out = tmp_path / "in.jsonl", tmp_path / "out.jsonl"
    _write(inp, [_record("a"), _record("a", d=5)])
    summary = run(str(inp), str(out), check_ids=False)
    assert [g["result"] for g in _read(out)] == [_det7(1, 2, 3, 4), _det7(1, 2, 3, 5)]
    assert summary.failed == 0


def _many(rng, count, dup_rate):
    """Records with ids r0, r1, ...; some repeat an earlier id. Returns the records and,
    per line, the line of the first record with its id (None when it is the first)."""
    records, first_of, firsts = [], {}, []
    for i in range(count):
        if i and rng.random() < dup_rate:
            rid = f"r{rng.integers(0, i)}" if rng.random() < 0.5 else int(rng.integers(0, i))
        else:
            rid = f"r{i}" if i % 3 else i
        a, b, c, d = (int(x) for x in rng.integers(0, 7, 4))
        records.append(_record(rid, a, b, c, d))
        key = (type(rid) is int, rid)
        firsts.append(first_of.get(key))
        first_of.setdefault(key, i + 1)
    return records, firsts


def _check_many(records, firsts, got):
    assert len(got) == len(records)
    for rec, first, g in zip(records, firsts, got):
        assert g["id"] == rec["id"]
        if first is None:
            assert g["result"] == _det7(*rec["matrix"][0], *rec["matrix"][1])
        else:
            assert g["error"]["message"].startswith(
                f"duplicate id {json.dumps(rec['id'])}: the record on line {first} ")


@pytest.mark.parametrize("workers,chunk", [(1, 7), (1, 1000), (2, 333)])
def test_duplicates_across_chunks_and_workers(tmp_path, workers, chunk):
    rng = np.random.default_rng(20261202)
    records, firsts = _many(rng, 3000, 0.1)
    inp, out = tmp_path / "in.jsonl", tmp_path / "out.jsonl"
    _write(inp, records)
    summary = run(str(inp), str(out), workers=workers, chunk_size=chunk)
    _check_many(records, firsts, _read(out))
    assert summary.failed == sum(f is not None for f in firsts)


def test_resume_rebuilds_the_ids_of_the_part_already_done(tmp_path):
    rng = np.random.default_rng(7)
    records, firsts = _many(rng, 2000, 0.2)
    inp, out = tmp_path / "in.jsonl", tmp_path / "out.jsonl"
    _write(inp, records)

    class Stop(Exception):
        pass

    calls = []

    def stop_after_three_chunks(done, total, n):
        calls.append(n)
        if len(calls) == 4:
            raise Stop

    with pytest.raises(Stop):
        run(str(inp), str(out), chunk_size=250, progress=stop_after_three_chunks)
    # Resume with another chunk size: the recorded offset falls inside a chunk.
    summary = run(str(inp), str(out), chunk_size=170, resume=True)
    assert summary.resumed
    _check_many(records, firsts, _read(out))


def test_registry_is_exact_when_different_ids_share_a_hash(tmp_path):
    # Equal hashes forced by hand: the registry must compare the ids themselves.
    lines = [json.dumps({"id": rid}) for rid in ["x", "y", "y", "x", "z", 5]]
    path = tmp_path / "ids.jsonl"
    path.write_text("\n".join(lines) + "\n")
    offsets = np.cumsum([0] + [len(t) + 1 for t in lines[:-1]]).astype(np.int64)
    reg = IdRegistry(str(path), capacity=4)
    h = np.full(6, 12345, dtype=np.uint64)
    found = reg.add((h, np.arange(1, 7, dtype=np.int64), offsets,
                     np.arange(6, dtype=np.int64)), 0)
    reg.close()
    assert found == [(2, 3, 2), (3, 4, 1)]
    assert reg.count == 4  # x, y, z, 5 (the table grew from 4 slots)


def test_registry_grows_without_false_duplicates(tmp_path):
    count = 200_000
    text = "".join(json.dumps({"id": f"k{i}"}) + "\n" for i in range(count))
    text += json.dumps({"id": "k123456"}) + "\n"
    path = tmp_path / "ids.jsonl"
    path.write_text(text)
    data = text.encode()
    reg = IdRegistry(str(path), capacity=16)
    found = reg.add(scan_ids(data, 1), 0)
    reg.close()
    assert found == [(count, count + 1, 123457)]
    assert reg.count == count
    assert reg.keys.shape[0] >= count / 0.7


def test_a_line_of_control_characters_is_an_error_line_not_a_blank_one(tmp_path):
    # JSON whitespace is space, tab, LF and CR only (RFC 8259, section 2); U+001C and
    # U+2028 count as whitespace for Python's str.strip, not for JSON.
    inp, out = tmp_path / "in.jsonl", tmp_path / "out.jsonl"
    _write(inp, [_record("a"), "\x1c", " \t ", "\u2028", _record("b")])
    summary = run(str(inp), str(out))
    got = _read(out)
    assert [g["id"] for g in got] == ["a", None, None, "b"]
    assert [g["line"] for g in got if "error" in g] == [2, 4]
    assert summary.records == 4 and summary.failed == 2
