"""Inputs users have: compressed CSV, other separators and decimal marks, UTF-16, Excel, Stata.

Outside check: every file here is written by pandas' own writers (``DataFrame.to_csv``
with its ``compression``, ``sep``, ``decimal`` and ``encoding`` options,
``DataFrame.to_excel`` through openpyxl, ``DataFrame.to_stata``, ``DataFrame.to_parquet``
through pyarrow) from ONE seeded frame, and relspan must read the same numbers from each:
the analysis moments are compared exactly, and a whole ``check`` run gives identical
``results.json`` numbers (``test_every_format_gives_identical_results_json_numbers``).
"""

from __future__ import annotations

import bz2
import gzip
import json
import textwrap

import numpy as np
import pandas as pd
import pytest

import relspan
from relspan.data import prepare_dataset
from relspan.data.sources import detect_source, file_sha256, open_source
from relspan.errors import DataError, SpecError

from data_helpers import FULL, make_spec, quarters

pytest.importorskip("openpyxl")

COLUMNS = ["a", "b", "c"]


@pytest.fixture(scope="module")
def frame() -> pd.DataFrame:
    rng = np.random.default_rng(160)
    t = 60
    base = rng.normal(size=(t, 2))
    x = np.column_stack([base[:, 0], base[:, 1], base[:, 0] + base[:, 1]]) + 0.1 * rng.normal(size=(t, 3))
    x = np.round(x * 1000 + 5000, 3)  # numbers a spreadsheet would hold
    return pd.DataFrame({"quarter": quarters("1990Q1", t), "a": x[:, 0], "b": x[:, 1], "c": x[:, 2]})


def _writers(frame, folder):
    """Files written by pandas' own writers: name -> (path, what must be detected)."""
    out = {}

    def put(name, write, detected=None):
        path = folder / name
        write(path)
        out[name] = (path, detected)

    put("plain.csv", lambda p: frame.to_csv(p, index=False))
    put("data.csv.gz", lambda p: frame.to_csv(p, index=False, compression="gzip"), "gzip-compressed")
    put("data.csv.bz2", lambda p: frame.to_csv(p, index=False, compression="bz2"), "bzip2-compressed")
    put("data.csv.xz", lambda p: frame.to_csv(p, index=False, compression="xz"), "xz-compressed")
    put("data.csv.zip", lambda p: frame.to_csv(p, index=False, compression="zip"), "zip-compressed")
    put("semicolon.csv", lambda p: frame.to_csv(p, index=False, sep=";", decimal=","),
        "separator semicolon (';'), decimal mark ','")
    put("utf16.csv", lambda p: frame.to_csv(p, index=False, encoding="utf-16"),
        "UTF-16 with a byte-order mark")
    put("tabs.tsv", lambda p: frame.to_csv(p, index=False, sep="\t"))
    put("book.xlsx", lambda p: frame.to_excel(p, index=False, sheet_name="numbers"),
        "an Excel workbook, sheet 'numbers'")
    put("data.dta", lambda p: frame.to_stata(p, write_index=False, version=118), "Stata .dta file")
    put("data.parquet", lambda p: frame.to_parquet(p, index=False))
    # misnamed files: gzip data called .csv, Parquet called .csv
    put("gzip-named.csv", lambda p: frame.to_csv(p, index=False, compression="gzip"), "gzip-compressed")
    put("parquet-named.csv", lambda p: frame.to_parquet(p, index=False), "Parquet (detected")
    return out


def _prep(path, **kw):
    return prepare_dataset(make_spec(path, COLUMNS, time="quarter", **kw), [FULL])


@pytest.fixture(scope="module")
def written(frame, tmp_path_factory):
    pytest.importorskip("pyarrow")
    return _writers(frame, tmp_path_factory.mktemp("formats"))


def test_every_format_written_by_pandas_reads_the_same_moments_and_says_what_was_detected(written):
    ref = _prep(written["plain.csv"][0])
    assert ref.read_as == ""
    for name, (path, detected) in written.items():
        got = _prep(path)
        assert got.rows_read == ref.rows_read == 60, name
        np.testing.assert_array_equal(got.full.mean, ref.full.mean, err_msg=name)
        np.testing.assert_array_equal(got.full.comoment, ref.full.comoment, err_msg=name)
        assert got.period == ref.period, name
        if detected:
            assert detected in got.read_as, (name, got.read_as)


def test_checksum_is_of_the_compressed_file_as_published(written):
    path = written["data.csv.gz"][0]
    assert _prep(path).sha256 == file_sha256(path)
    assert _prep(path).sha256 != file_sha256(written["plain.csv"][0])


def test_sep_line_names_the_separator_and_is_skipped(frame, tmp_path):
    path = tmp_path / "excel-style.csv"
    path.write_text("sep=;\n" + frame.to_csv(index=False, sep=";", decimal=","), encoding="utf-8")
    src = open_source("data/excel-style.csv", path)
    assert src.delimiter == ";" and src.decimal == "," and src.skip_lines == 1
    assert src.header == ("quarter", "a", "b", "c")
    assert "from a 'sep=' first line" in src.read_as and "detected: separator" in src.read_as
    np.testing.assert_array_equal(_prep(path).full.comoment,
                                  _prep(_write_plain(frame, tmp_path)).full.comoment)


def _write_plain(frame, folder):
    p = folder / "plain.csv"
    frame.to_csv(p, index=False)
    return p


def test_utf16_without_a_bom_is_recognised_by_its_nul_bytes(frame, tmp_path):
    path = tmp_path / "le.csv"
    path.write_bytes(frame.to_csv(index=False).encode("utf-16-le"))
    src = detect_source("data/le.csv", path)
    assert src.encoding == "utf-16-le" and "detected: encoding" in src.read_as
    np.testing.assert_array_equal(_prep(path).full.comoment,
                                  _prep(_write_plain(frame, tmp_path)).full.comoment)


def test_cp1252_file_is_refused_unless_its_encoding_is_set(tmp_path):
    text = "Zeit;Menge in \u20ac;Preis\n1;1,5;2,0\n2;2,5;1,0\n3;0,5;7,0\n4;3,0;4,0\n5;1,0;0,5\n"
    path = tmp_path / "euro.csv"
    path.write_bytes(text.encode("cp1252"))
    spec = make_spec(path, ["Menge in \u20ac", "Preis"])
    with pytest.raises(DataError, match=r"is not UTF-8 text: the byte at offset 14 \(line 1\) is 0x80"
                                        r".*File read as CSV text, UTF-8, separator semicolon.*"
                                        r"\n  Fix: .*encoding: cp1252") as info:
        prepare_dataset(spec, [FULL])
    assert info.value.line == 1
    import dataclasses

    good = prepare_dataset(dataclasses.replace(spec, encoding="cp1252"), [FULL])
    assert good.rows_used == 5 and "Windows-1252" in good.read_as
    np.testing.assert_allclose(good.full.mean, [1.7, 2.9])


def test_bad_cell_in_a_decimal_comma_file_is_located_and_names_the_reading(tmp_path):
    path = tmp_path / "d.csv"
    path.write_text("t;x;y\n1;1,5;2\n2;2,5;1\n3;n/v;7\n4;3,0;4\n", encoding="utf-8")
    with pytest.raises(DataError, match=r"^data/d\.csv: column 'x', row 3: 'n/v' is not a number\. "
                                        r"\(File read as CSV text, UTF-8, separator semicolon \(';'\), "
                                        r"decimal mark ','; detected: separator, decimal mark\.\)"
                                        r"\n  Fix: .*',' as the decimal mark") as info:
        prepare_dataset(make_spec(path, ["x", "y"]), [FULL])
    assert (info.value.column, info.value.row) == ("x", 3)


def test_truncated_gzip_is_a_located_error(frame, tmp_path):
    data = gzip.compress(frame.to_csv(index=False).encode())
    path = tmp_path / "cut.csv.gz"
    path.write_bytes(data[: len(data) // 2])
    with pytest.raises(DataError, match=r"is gzip-compressed but cannot be decompressed after \d+ bytes"
                                        r".*damaged or was cut short"):
        _prep(path)


def test_zip_with_two_files_is_refused_with_their_names(frame, tmp_path):
    import zipfile

    path = tmp_path / "two.zip"
    with zipfile.ZipFile(path, "w") as zf:
        zf.writestr("a.csv", frame.to_csv(index=False))
        zf.writestr("b.csv", frame.to_csv(index=False))
    with pytest.raises(DataError, match=r"zip archive with 2 files \(a\.csv, b\.csv\)"):
        _prep(path)


def test_legacy_xls_is_refused_with_the_fix(tmp_path):
    path = tmp_path / "old.xls"
    path.write_bytes(b"\xd0\xcf\x11\xe0\xa1\xb1\x1a\xe1" + b"\0" * 600)
    with pytest.raises(DataError, match=r"legacy Excel workbook \(\.xls.*\n  Fix: .*save it as \.xlsx"):
        _prep(path)


def test_excel_sheet_by_name_and_position_and_a_missing_sheet_names_the_sheets(frame, tmp_path):
    path = tmp_path / "two.xlsx"
    with pd.ExcelWriter(path) as w:
        pd.DataFrame({"note": ["cover sheet"]}).to_excel(w, sheet_name="Cover", index=False)
        frame.to_excel(w, sheet_name="Data", index=False)
    ref = _prep(_write_plain(frame, tmp_path))
    import dataclasses

    spec = make_spec(path, COLUMNS, time="quarter")
    by_name = prepare_dataset(dataclasses.replace(spec, sheet="Data"), [FULL])
    by_pos = prepare_dataset(dataclasses.replace(spec, sheet=1), [FULL])
    np.testing.assert_array_equal(by_name.full.comoment, ref.full.comoment)
    np.testing.assert_array_equal(by_pos.full.comoment, ref.full.comoment)
    with pytest.raises(DataError, match=r"has no sheet 'Dta'; its sheets are 'Cover', 'Data'\. "
                                        r"Did you mean 'Data'\?"):
        prepare_dataset(dataclasses.replace(spec, sheet="Dta"), [FULL])
    with pytest.raises(DataError, match=r"has no column 'a'.*File read as an Excel workbook, sheet 'Cover'"):
        prepare_dataset(spec, [FULL])


def test_excel_and_stata_dates_are_typed_times(frame, tmp_path):
    dated = frame.assign(quarter=pd.period_range("1990Q1", periods=len(frame), freq="Q").to_timestamp())
    xlsx, dta = tmp_path / "d.xlsx", tmp_path / "d.dta"
    dated.to_excel(xlsx, index=False)
    dated.to_stata(dta, write_index=False, convert_dates={"quarter": "td"})
    iso = tmp_path / "iso.csv"
    dated.assign(quarter=dated["quarter"].dt.strftime("%Y-%m-%d")).to_csv(iso, index=False)
    ref = _prep(iso)
    for path in (xlsx, dta):
        got = _prep(path)
        assert got.period == ref.period, path.name
        np.testing.assert_array_equal(got.full.comoment, ref.full.comoment)


def test_bad_cell_in_excel_names_column_and_data_row(frame, tmp_path):
    bad = frame.astype({"b": object})
    bad.loc[6, "b"] = "n.a."
    path = tmp_path / "bad.xlsx"
    bad.to_excel(path, index=False)
    with pytest.raises(DataError, match=r"^data/bad\.xlsx: column 'b', row 7: 'n\.a\.' is not a number"
                                        r"\. \(File read as an Excel workbook, sheet 'Sheet1'\.\)"):
        _prep(path)


def test_spec_keys_are_validated_with_line_numbers(tmp_path):
    from relspan.spec import parse_spec

    (tmp_path / "d.csv").write_text("x,y\n1,2\n2,1\n3,3\n4,5\n", encoding="utf-8")
    base = textwrap.dedent("""\
        relspan: 1
        report: {{title: t}}
        datasets:
          - id: d
            source: d.csv
            {key}
            variables: [{{column: x}}, {{column: y}}]
        windows: [{{id: full, kind: full}}]
        """)
    with pytest.raises(SpecError, match=r":6: datasets\[0\]\.encoding is 'utf-99', which is not an "
                                        r"encoding Python knows"):
        parse_spec(base.format(key="encoding: utf-99"), path=tmp_path / "s.yaml")
    with pytest.raises(SpecError, match=r"datasets\[0\]\.separator"):
        parse_spec(base.format(key="separator: ';;'"), path=tmp_path / "s.yaml")
    with pytest.raises(SpecError, match=r"datasets\[0\]\.decimal"):
        parse_spec(base.format(key="decimal: ';'"), path=tmp_path / "s.yaml")
    ok = parse_spec(base.format(key="separator: \"\\t\""), path=tmp_path / "s.yaml")
    assert ok.datasets[0].separator == "\t"


def test_every_format_gives_identical_results_json_numbers(written, tmp_path):
    """A whole check run: results.json numbers equal across the formats pandas wrote."""
    from relspan.report.site_content import dataset_document

    names = [n for n in written if n != "parquet-named.csv"] + ["parquet-named.csv"]
    docs = []
    for i, name in enumerate(names):
        # one spec per format, the dataset always called "f": resampled numbers (break scan, stability
        # thresholds) draw from a stream named by the dataset id, so the ids must match to compare them
        folder = tmp_path / f"proj{i}"
        (folder / "data").mkdir(parents=True)
        target = folder / "data" / name
        target.write_bytes(written[name][0].read_bytes())
        spec = folder / "spec.yaml"
        spec.write_text("relspan: 1\nreport: {title: formats}\ndatasets:\n"
                        f"  - id: f\n    source: data/{name}\n    time: {{column: quarter, format: quarter}}\n"
                        "    variables: [{column: a}, {column: b}, {column: c}]"
                        + "\nwindows:\n  - {id: full, kind: full}\n  - {id: roll, kind: rolling, width: 24, step: 12}\n"
                        "checks: {assumptions: [elementary, equal, bounded, diagonal]}\n", encoding="utf-8")
        docs.append(dataset_document(relspan.check(spec, jobs=1, use_cache=False).run.datasets[0]))

    def drop_inference(x):
        # each window's resampling stream is derived from the dataset id (analysis/resample.window_seed),
        # so resampled numbers differ between these datasets by design; everything else must agree
        if isinstance(x, dict):
            return {k: drop_inference(v) for k, v in x.items() if k != "inference"}
        if isinstance(x, list):
            return [drop_inference(v) for v in x]
        return x

    def numbers(doc):
        doc = {k: v for k, v in doc.items() if k not in ("id", "title", "source", "source_sha256",
                                                        "source_read_as")}
        return json.dumps(doc, sort_keys=True)

    ref = numbers(docs[0])
    for name, doc in zip(names, docs):
        assert numbers(doc) == ref, name


# ---------------------------------------------------------------- real files a package ships


def _statsmodels_file(*parts):
    sm = pytest.importorskip("statsmodels")
    from pathlib import Path

    path = Path(sm.__file__).parent.joinpath(*parts)
    if not path.is_file():
        pytest.skip(f"this statsmodels does not ship {'/'.join(parts)}")
    return path


def test_stata_file_shipped_by_statsmodels_reads_the_numbers_of_its_csv_twin():
    # open data a package ships: statsmodels' macrodata (US macroeconomic series 1959Q1-2009Q3),
    # shipped as statsmodels/datasets/macrodata/macrodata.dta (float32) and as macrodata.csv,
    # which statsmodels' own loader reads (statsmodels.datasets.macrodata.load_pandas)
    from statsmodels.datasets import macrodata

    dta = _statsmodels_file("datasets", "macrodata", "macrodata.dta")
    cols = ["realgdp", "realcons", "realinv"]
    got = prepare_dataset(make_spec(dta, cols, source="macrodata.dta"), [FULL])
    assert "a Stata .dta file" in got.read_as and got.rows_read == 203
    ref = macrodata.load_pandas().data[cols].to_numpy(dtype=float)
    # the .dta stores float32: about 7 significant digits
    np.testing.assert_allclose(got.full.mean, ref.mean(axis=0), rtol=2e-7)
    np.testing.assert_allclose(got.full.covariance(), np.cov(ref, rowvar=False), rtol=1e-5)


def test_legacy_xls_shipped_by_statsmodels_is_refused_with_the_fix():
    # a real Excel 97-2003 workbook from statsmodels' test data (frbny_nowcast/Nowcasting/test_spec.xls)
    xls = _statsmodels_file("tsa", "statespace", "tests", "results", "frbny_nowcast", "Nowcasting",
                            "test_spec.xls")
    with pytest.raises(DataError, match=r"legacy Excel workbook .*\n  Fix: .*save it as \.xlsx"):
        open_source("test_spec.xls", xls)
