"""Reading files: formats, encodings, and every bad-input error with its wording pinned."""

from __future__ import annotations

import sys

import numpy as np
import pandas as pd
import pytest

from relspan.data import prepare_dataset
from relspan.errors import DataError, DependencyError

from data_helpers import FULL, make_spec

GOOD = "t,x,y\n1,1.5,2\n2,2.5,1\n3,0.5,7\n4,3.0,4\n5,1.0,0\n"


def _prep(path, cols=("x", "y"), **kw):
    return prepare_dataset(make_spec(path, list(cols), **kw), [FULL])


def test_utf8_with_bom_is_accepted(write_csv):
    path = write_csv(b"\xef\xbb\xbf" + GOOD.encode())
    prepared = _prep(path, cols=("t", "x"))
    assert prepared.variables == ("t", "x") and prepared.rows_used == 5


def test_non_utf8_bytes_name_file_offset_and_line(write_csv):
    path = write_csv(GOOD.encode() + b"6,caf\xe9,1\n")
    offset = len(GOOD.encode()) + len(b"6,caf")
    with pytest.raises(DataError, match=rf"^data/t\.csv:7: is not UTF-8 text: the byte at offset "
                                        rf"{offset} \(line 7\) is 0xe9.*\n  Fix: save the file as UTF-8"):
        _prep(path)


def test_utf16_file_with_a_bom_is_read_as_the_same_table_and_the_reading_is_said(write_csv):
    utf8 = _prep(write_csv(GOOD))
    utf16 = _prep(write_csv(GOOD.encode("utf-16"), name="u.csv"))
    assert utf16.full == utf8.full
    assert "UTF-16 with a byte-order mark" in utf16.read_as and "detected: encoding" in utf16.read_as
    assert utf8.read_as == ""


def test_tsv_and_txt_are_detected(write_csv):
    tsv = write_csv(GOOD.replace(",", "\t"), name="t.tsv")
    txt = write_csv(GOOD.replace(",", ";"), name="t.txt")
    a, b, c = _prep(tsv), _prep(txt), _prep(write_csv(GOOD))
    assert a.full == c.full and b.full == c.full


def test_empty_file_is_an_error(write_csv):
    with pytest.raises(DataError, match=r"^data/t\.csv: is empty \(0 bytes\)\.\n  Fix: write a header"):
        _prep(write_csv(b""))


def test_header_only_file_is_an_error(write_csv):
    with pytest.raises(DataError, match=r"^data/t\.csv: has a header but no data rows\.\n  Fix: add data rows"):
        _prep(write_csv("t,x,y\n"))


def test_duplicated_column_name_is_an_error(write_csv):
    path = write_csv("x,y,x\n1,2,3\n4,5,6\n")
    with pytest.raises(DataError, match=r"has more than one column named 'x' \(columns 1 and 3 of the "
                                        r"header\).*\n  Fix: rename the duplicated columns"):
        _prep(path)


def test_missing_column_lists_columns_and_nearest_match(write_csv):
    path = write_csv(GOOD)
    with pytest.raises(DataError, match=r"has no column 'xx'\. Its columns are: 't', 'x', 'y'\. "
                                        r"Did you mean 'x'\?.*\n  Fix: change variables\[0\]\.column "
                                        r"to 'x'") as info:
        _prep(path, cols=("xx", "y"))
    assert info.value.column == "xx" and info.value.key == "variables[0].column"


def test_non_numeric_cell_names_column_row_and_value(write_csv):
    path = write_csv(GOOD + "6,n/a?,3\n")
    with pytest.raises(DataError, match=r"^data/t\.csv: column 'x', row 6: 'n/a\?' is not a number\."
                                        r"\n  Fix: correct or empty that cell") as info:
        prepare_dataset(make_spec(path, ["x", "y"]), [FULL], chunk_rows=2)
    assert info.value.row == 6 and info.value.got == "n/a?"


def test_infinite_value_is_an_error(write_csv):
    path = write_csv(GOOD + "6,-inf,3\n")
    with pytest.raises(DataError, match=r"column 'x', row 6: the value is -infinity; relspan needs "
                                        r"finite numbers\.\n  Fix: replace the infinite value"):
        _prep(path)


def test_absurd_magnitude_is_an_error(write_csv):
    path = write_csv(GOOD + "6,2,3e200\n")
    with pytest.raises(DataError, match=r"column 'y', row 6: 3e\+200 is too large in magnitude "
                                        r"\(above 1e\+150\): its square would overflow.*\n  Fix: "
                                        r"rescale the column"):
        _prep(path)


def test_folder_instead_of_file_is_an_error(tmp_path):
    folder = tmp_path / "d.csv"
    folder.mkdir()
    with pytest.raises(DataError, match=r"^data/d\.csv: is a folder, not a data file\.\n  Fix: "):
        _prep(folder)


def test_missing_file_is_an_error(tmp_path):
    with pytest.raises(DataError, match=r"^data/none\.csv: does not exist\.\n  Fix: check the "
                                        r"dataset's source"):
        _prep(tmp_path / "none.csv")


def test_row_with_too_many_fields_names_its_line(write_csv):
    path = write_csv("x,y,z\n1,2,3\n3,4,5\n3,4,5,6\n")
    with pytest.raises(DataError, match=r"^data/t\.csv:4: line 4 has 4 fields but the header has 3\."
                                        r"\n  Fix: remove the extra separators"):
        _prep(path)


def test_parquet_without_pyarrow_asks_for_the_extra(tmp_path, monkeypatch):
    pytest.importorskip("pyarrow")
    p = tmp_path / "t.parquet"
    pd.DataFrame({"x": [1.0, 2.0, 4.0, 3.0, 5.0], "y": [2.0, 1.0, 0.0, 4.0, 3.0]}).to_parquet(p)
    monkeypatch.setitem(sys.modules, "pyarrow", None)
    monkeypatch.setitem(sys.modules, "pyarrow.parquet", None)
    with pytest.raises(DependencyError, match=r"needs the optional package pyarrow.*\n  Fix: pip "
                                              r"install relspan\[parquet\]"):
        _prep(p)


def test_garbage_with_parquet_extension_is_a_data_error(write_csv):
    path = write_csv(b"this is not parquet", name="t.parquet")
    with pytest.raises(DataError, match=r"is not a readable Parquet file"):
        _prep(path)


def test_only_selected_columns_are_checked(write_csv):
    path = write_csv("x,notes,y\n1,hello,2\n2,world,1\n3,!,5\n4,?,3\n5,-,0\n")
    prepared = _prep(path)
    np.testing.assert_allclose(prepared.full.mean, [3.0, 2.2])
