"""Tests of gfla.io.matrix_text: matrix and vector text, .npy and text files.

The reference for number syntax is Python's own integer formatting (``str``, ``format(v,
'x')``) -- the text a user or another program writes; common practice.
"""

import pickle

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from gfla.errors import InputError
from gfla.io.matrix_text import (load_matrix_file, load_vector_file, parse_matrix,
                                 parse_vector)


# --------------------------------------------------------------------------- good text

def test_rows_by_semicolon_and_newline_entries_by_blank_and_comma():
    assert parse_matrix("1 2 3; 4 5 6") == [[1, 2, 3], [4, 5, 6]]
    assert parse_matrix("1,2,3\n4, 5 ,6\n") == [[1, 2, 3], [4, 5, 6]]
    assert parse_matrix("1\t2;\r\n3 4;") == [[1, 2], [3, 4]]


def test_decimal_and_prefixed_hex_mix():
    assert parse_matrix("0x1F 10; 0XFF 0") == [[31, 10], [255, 0]]


def test_hex_mode_reads_bare_tokens_as_hex():
    # The byte layout of FIPS 197's MixColumns matrix (FIPS 197, section 5.1.3), as text.
    text = "02 03 01 01; 01 02 03 01; 01 01 02 03; 03 01 01 02"
    assert parse_matrix(text, hex=True) == [[2, 3, 1, 1], [1, 2, 3, 1], [1, 1, 2, 3], [3, 1, 1, 2]]
    assert parse_matrix("0e 0b; 0x0d 09", hex=True) == [[14, 11], [13, 9]]


def test_comments_and_blank_lines_are_skipped():
    text = """
    # a 2x2 example
    1 2   # first row

    3 4   # second row
    """
    assert parse_matrix(text) == [[1, 2], [3, 4]]


def test_entries_beyond_int64_stay_python_ints():
    top = 2**64 - 1  # largest element of Z/2^64 (common practice)
    rows = parse_matrix(f"{top} 0; 0x{top:x} 1")
    assert rows == [[top, 0], [top, 1]]
    assert all(type(v) is int for row in rows for v in row)


def test_signs_are_kept_for_the_field_to_judge():
    # Range checking is the field's job (F.asarray), so -1 comes back as -1.
    assert parse_matrix("-1 +2") == [[-1, 2]]


def test_bytes_input_is_decoded():
    assert parse_matrix(b"1 2; 3 4") == [[1, 2], [3, 4]]


@settings(max_examples=60, deadline=None)
@given(
    rows=st.integers(1, 5).flatmap(lambda m: st.integers(1, 5).flatmap(
        lambda n: st.lists(st.lists(st.integers(0, 2**64 - 1), min_size=n, max_size=n),
                           min_size=m, max_size=m))),
    row_sep=st.sampled_from([";", "\n", " ;\n", "\r\n"]),
    entry_sep=st.sampled_from([" ", ",", ", ", "\t", "  "]),
    style=st.sampled_from(["dec", "0x", "bare-hex"]),
)
def test_round_trip_of_formatted_matrices(rows, row_sep, entry_sep, style):
    def fmt(v):
        return {"dec": str(v), "0x": f"0x{v:x}", "bare-hex": f"{v:02x}"}[style]

    text = row_sep.join(entry_sep.join(fmt(v) for v in row) for row in rows)
    assert parse_matrix(text, hex=(style == "bare-hex")) == rows


# --------------------------------------------------------------------------- bad text

@pytest.mark.parametrize("text, message", [
    ("", "empty matrix"),
    ("   \n ; ;\n", "empty matrix"),
    ("# only a comment", "empty matrix"),
    ("1 2 3; 4 5 6; 7 x1 9", "row 3, column 2: 'x1' is not an integer"),
    ("1 2 3\n4 5\n", "row 2 has 2 entries, row 1 has 3"),
    ("1 2; 3 4; 5 6 7", "row 3 has 3 entries, row 1 has 2"),
    ("1,,2", "row 1, column 2: empty entry"),
    ("1 2.5", "row 1, column 2: '2.5' is not an integer"),
    ("1 ff", "row 1, column 2: 'ff' is not an integer (hexadecimal needs a 0x prefix"),
    ("1 0xg1", "row 1, column 2: '0xg1' is not an integer"),
])
def test_malformed_text_names_the_place(text, message):
    with pytest.raises(InputError) as info:
        parse_matrix(text)
    assert message in str(info.value)
    assert "\n" not in str(info.value)


def test_hex_mode_rejects_non_hex_tokens():
    with pytest.raises(InputError, match=r"row 2, column 1: 'zz' is not a hexadecimal number"):
        parse_matrix("01 02; zz 03", hex=True)


def test_overlong_token_is_refused_without_echoing_it():
    with pytest.raises(InputError) as info:
        parse_matrix("1 " + "9" * 5000)
    assert "row 1, column 2" in str(info.value)
    assert len(str(info.value)) < 120


def test_input_error_is_a_value_error():
    # DEVELOPERS.md: InputError(GflaError, ValueError).
    with pytest.raises(ValueError):
        parse_matrix("a")


def test_non_text_is_refused():
    with pytest.raises(InputError, match="must be a string"):
        parse_matrix(12)


# --------------------------------------------------------------------------- vectors

def test_vector_as_row_or_column():
    assert parse_vector("1 2 3") == [1, 2, 3]
    assert parse_vector("1; 2; 3") == [1, 2, 3]
    assert parse_vector("1\n2\n3\n") == [1, 2, 3]
    assert parse_vector("ff 01", hex=True) == [255, 1]


def test_vector_errors():
    with pytest.raises(InputError, match="empty vector"):
        parse_vector(" ")
    with pytest.raises(InputError, match="one row or one column"):
        parse_vector("1 2; 3 4")
    with pytest.raises(InputError, match="row 1, column 2: 'q' is not an integer"):
        parse_vector("1 q")


# --------------------------------------------------------------------------- files

def test_text_file(tmp_path):
    path = tmp_path / "m.txt"
    path.write_text("1 2 # c\n3 4\n")
    assert load_matrix_file(path) == [[1, 2], [3, 4]]
    path.write_text("0e 0b\n0d 09\n")
    assert load_matrix_file(str(path), hex=True) == [[14, 11], [13, 9]]


def test_text_file_errors_start_with_the_path(tmp_path):
    path = tmp_path / "bad.txt"
    path.write_text("1 2\n3\n")
    with pytest.raises(InputError) as info:
        load_matrix_file(path)
    assert str(info.value) == f"{path}: row 2 has 1 entry, row 1 has 2"


def test_missing_file_and_directory(tmp_path):
    with pytest.raises(InputError, match="no such file"):
        load_matrix_file(tmp_path / "absent.txt")
    with pytest.raises(InputError, match="no such file"):
        load_matrix_file(tmp_path / "absent.npy")
    with pytest.raises(InputError, match="is a directory"):
        load_matrix_file(tmp_path)


def test_binary_junk_is_not_text(tmp_path):
    path = tmp_path / "junk.bin"
    path.write_bytes(bytes([0xFF, 0xFE, 0x00, 0x81]))
    with pytest.raises(InputError, match="neither UTF-8 text nor a .npy file"):
        load_matrix_file(path)


@pytest.mark.parametrize("dtype", [np.int64, np.uint8, np.uint16, np.int32, np.uint64])
def test_npy_integer_arrays(tmp_path, dtype):
    A = np.arange(6, dtype=dtype).reshape(2, 3)
    path = tmp_path / "m.npy"
    np.save(path, A)
    got = load_matrix_file(path)
    assert isinstance(got, np.ndarray) and got.dtype == A.dtype
    assert np.array_equal(got, A)


def test_npy_uint64_top_values_survive(tmp_path):
    A = np.array([[2**64 - 1, 2**63]], dtype=np.uint64)
    path = tmp_path / "big.npy"
    np.save(path, A)
    assert load_matrix_file(path).tolist() == [[2**64 - 1, 2**63]]


def test_npy_detected_by_magic_whatever_the_name(tmp_path):
    path = tmp_path / "matrix.dat"
    with open(path, "wb") as handle:
        np.save(handle, np.eye(3, dtype=np.int64))
    assert np.array_equal(load_matrix_file(path), np.eye(3, dtype=np.int64))


def test_npy_object_dtype_is_refused_without_unpickling(tmp_path):
    path = tmp_path / "objects.npy"
    np.save(path, np.array([[1, 2], [3, None]], dtype=object), allow_pickle=True)
    with pytest.raises(InputError, match="object dtype"):
        load_matrix_file(path)


def test_npy_with_a_pickle_payload_is_never_executed(tmp_path):
    # A .npy whose header claims object dtype and whose body is a pickle that would run
    # code when loaded; np.load(..., allow_pickle=False) must refuse it.
    marker = tmp_path / "ran"

    class Payload:
        def __reduce__(self):
            return (open, (str(marker), "w"))

    header = np.lib.format.header_data_from_array_1_0(np.empty((1,), dtype=object))
    path = tmp_path / "evil.npy"
    with open(path, "wb") as handle:
        np.lib.format.write_array_header_1_0(handle, header)
        pickle.dump(Payload(), handle)
    with pytest.raises(InputError, match="object dtype"):
        load_matrix_file(path)
    assert not marker.exists()


def test_npy_float_and_wrong_ndim_are_refused(tmp_path):
    path = tmp_path / "f.npy"
    np.save(path, np.ones((2, 2)))
    with pytest.raises(InputError, match="dtype float64; an integer dtype is needed"):
        load_matrix_file(path)
    np.save(path, np.ones((2, 2, 2), dtype=np.int64))
    with pytest.raises(InputError, match="has 3 dimensions"):
        load_matrix_file(path)
    np.save(path, np.ones(4, dtype=np.int64))
    with pytest.raises(InputError, match="has 1 dimension "):
        load_matrix_file(path)
    np.save(path, np.ones((0, 3), dtype=np.int64))
    with pytest.raises(InputError, match="empty matrix"):
        load_matrix_file(path)


def test_truncated_npy_is_refused(tmp_path):
    path = tmp_path / "cut.npy"
    np.save(path, np.arange(100, dtype=np.int64).reshape(10, 10))
    path.write_bytes(path.read_bytes()[:90])
    with pytest.raises(InputError, match="not a readable .npy file"):
        load_matrix_file(path)


def test_vector_files(tmp_path):
    path = tmp_path / "b.npy"
    np.save(path, np.array([[1], [2], [3]], dtype=np.int64))
    assert load_vector_file(path).tolist() == [1, 2, 3]
    np.save(path, np.ones((2, 2), dtype=np.int64))
    with pytest.raises(InputError, match="a vector needs 1 dimension"):
        load_vector_file(path)
    text = tmp_path / "b.txt"
    text.write_text("4\n5\n6\n")
    assert load_vector_file(text) == [4, 5, 6]
