"""Metric histories in: sequences, arrays, CSV files and bytes, pandas; the invented demo histories."""

from __future__ import annotations

import numpy as np
import pytest

from schedwidget import ScheduleError
from schedwidget.metrics import DEMO_NAMES, demo_csv, demo_path, make_demo_histories, read_metric


def write(tmp_path, text: str, name: str = "log.csv"):
    p = tmp_path / name
    p.write_text(text, encoding="utf-8")
    return p


class TestReadMetric:
    """read_metric gives a float64 array from every supported source, with clear errors otherwise."""

    def test_list_tuple_array(self):
        """Lists, tuples and arrays of numbers are read as float64."""
        for src in ([1, 2.5], (1, 2.5), np.array([1, 2.5], dtype=np.float32)):
            out = read_metric(src)
            assert out.dtype == np.float64 and out.tolist() == [1.0, 2.5]

    def test_csv_named_column(self, tmp_path):
        """A named column is read; comment and blank lines are skipped."""
        p = write(tmp_path, "# a comment\nepoch,loss,val_acc\n0,2.0,0.5\n\n1,1.5,0.625\n")
        assert read_metric(p, column="val_acc").tolist() == [0.5, 0.625]
        assert read_metric(str(p), column="loss").tolist() == [2.0, 1.5]
        assert read_metric(p, column=1).tolist() == [2.0, 1.5]

    def test_csv_single_value_column(self, tmp_path):
        """Without a column name, the only column besides epoch is read."""
        p = write(tmp_path, "epoch,val_acc\n0,0.5\n1,0.6\n")
        assert read_metric(p).tolist() == [0.5, 0.6]

    def test_csv_without_header(self, tmp_path):
        """A file of bare numbers has numbered columns."""
        p = write(tmp_path, "0.5\n0.6\n0.7\n")
        assert read_metric(p).tolist() == [0.5, 0.6, 0.7]

    def test_bytes_are_csv_content(self):
        """Uploaded bytes (with a UTF-8 byte-order mark) are read as CSV text."""
        data = "\ufeffepoch,val_acc\n0,0.25\n1,0.5\n".encode("utf-8")
        assert read_metric(data, column="val_acc").tolist() == [0.25, 0.5]

    def test_nan_cells_are_kept(self, tmp_path):
        """nan is a number here; the replay reports where it is."""
        out = read_metric(write(tmp_path, "epoch,val_acc\n0,0.5\n1,nan\n"))
        assert np.isnan(out[1])

    def test_missing_file(self, tmp_path):
        """A missing file is named, with the folder relative paths start from."""
        with pytest.raises(ScheduleError, match=r"^read_metric: source must be an existing CSV file, got '.*nope.csv' "
                                                r"\(no such file; relative paths start at "):
            read_metric(tmp_path / "nope.csv")

    def test_folder(self, tmp_path):
        """A folder is not a file."""
        with pytest.raises(ScheduleError, match=r"existing CSV file, got .* \(it is a folder\)"):
            read_metric(tmp_path)

    def test_missing_column_lists_columns(self, tmp_path):
        """A column that is not there is refused and the columns are listed."""
        p = write(tmp_path, "epoch,Val_Acc,loss\n0,0.5,1.0\n")
        with pytest.raises(ScheduleError, match=r"^read_metric: column must be one of 'epoch', 'Val_Acc', 'loss', "
                                                r"got 'val_acc' \(the columns of .*; did you mean 'Val_Acc'\?\)"):
            read_metric(p, column="val_acc")

    def test_ambiguous_column(self, tmp_path):
        """Several value columns and no column name: the columns are listed."""
        p = write(tmp_path, "epoch,loss,val_acc\n0,1.0,0.5\n")
        with pytest.raises(ScheduleError, match=r"column must be one of 'epoch', 'loss', 'val_acc' .*, got None "
                                                r"\(the file has several value columns; pass column=\.\.\. to pick one\)"):
            read_metric(p)

    def test_column_position_out_of_range(self, tmp_path):
        """A column position past the last column is refused."""
        with pytest.raises(ScheduleError, match=r"column must be a position in \[0, 1\]"):
            read_metric(write(tmp_path, "epoch,val_acc\n0,0.5\n"), column=2)

    def test_non_number_names_line_and_value(self, tmp_path):
        """A cell that is not a number is reported with its column, line, data row and value."""
        p = write(tmp_path, "# note\nepoch,val_acc\n0,0.5\n1,n/a\n")
        with pytest.raises(ScheduleError, match=r"^read_metric: 'val_acc' at line 4 of '.*log.csv' must be a number, "
                                                r"got 'n/a' \(data row 2; write nan for a missing value\)"):
            read_metric(p)

    def test_short_row(self, tmp_path):
        """A row without the cell is a non-number ''."""
        with pytest.raises(ScheduleError, match=r"'val_acc' at line 3 of .* must be a number, got ''"):
            read_metric(write(tmp_path, "epoch,val_acc\n0,0.5\n1\n"))

    @pytest.mark.parametrize("text, why", [
        ("", "the file is empty or holds only comments"),
        ("# only a comment\n\n", "the file is empty or holds only comments"),
        ("epoch,val_acc\n", "only the header epoch, val_acc was found"),
    ])
    def test_empty_files(self, tmp_path, text, why):
        """Empty, comment-only and header-only files are refused with the reason."""
        with pytest.raises(ScheduleError, match=r"source must be a CSV file with a header and at least one row, "
                                                r"got .* \(" + why):
            read_metric(write(tmp_path, text))

    def test_empty_list(self):
        """An empty list is refused."""
        with pytest.raises(ScheduleError, match=r"^read_metric: source must be a non-empty history"):
            read_metric([])

    def test_two_dimensional_array(self):
        """A 2-D array is refused with its shape."""
        with pytest.raises(ScheduleError, match=r"source must be a 1-D array of numbers, got 'an array of shape \(2, 2\)'"):
            read_metric(np.zeros((2, 2)))

    def test_non_numbers_in_a_list(self):
        """A non-number in a list names its index."""
        with pytest.raises(ScheduleError, match=r"source\[1\] must be a number, got True"):
            read_metric([0.5, True])

    def test_column_for_a_list(self):
        """A column name with a list is refused."""
        with pytest.raises(ScheduleError, match=r"column must be None for a list or an array, got 'val_acc'"):
            read_metric([0.5], column="val_acc")


class TestReadMetricPandas:
    """pandas objects are read when pandas is installed (never required)."""

    def test_series_and_frame(self):
        """A Series is read as is; a DataFrame by column."""
        pd = pytest.importorskip("pandas")
        assert read_metric(pd.Series([0.5, None, 0.7])).tolist()[::2] == [0.5, 0.7]
        df = pd.DataFrame({"epoch": [0, 1], "val_acc": [0.5, 0.6]})
        assert read_metric(df).tolist() == [0.5, 0.6]
        assert read_metric(df, column="epoch").tolist() == [0.0, 1.0]

    def test_frame_missing_column(self):
        """A DataFrame without the column lists its columns."""
        pd = pytest.importorskip("pandas")
        df = pd.DataFrame({"epoch": [0, 1], "val_acc": [0.5, 0.6]})
        with pytest.raises(ScheduleError, match=r"column must be one of 'epoch', 'val_acc', got 'acc' "
                                                r"\(the columns of the DataFrame\)"):
            read_metric(df, column="acc")

    def test_series_of_text(self):
        """A Series of words is refused."""
        pd = pytest.importorskip("pandas")
        with pytest.raises(ScheduleError, match=r"source must be a Series of numbers"):
            read_metric(pd.Series(["a", "b"]))


class TestHostileInput:
    """Issue 10: a long CSV field raised csv.Error, huge integers OverflowError, a masked array came back masked
    (and then broke the replay); pipes and devices were opened.  Every one is now a ScheduleError."""

    def test_field_over_the_csv_limit(self, tmp_path):
        """A field over csv's 131,072 characters is refused with its line and the limit."""
        p = write(tmp_path, "epoch,val_acc\n0,0.5\n1," + "9" * 200_000 + "\n")
        with pytest.raises(ScheduleError, match=r"read_metric: source must be a CSV file of numbers, got '.*log.csv' "
                                                r"\(line 3 cannot be read as CSV: field larger than field limit "
                                                r"\(131072\); a field holds at most 131,072 characters\)"):
            read_metric(p)
        with pytest.raises(ScheduleError, match=r"got the uploaded file \(line 2 cannot be read as CSV"):
            read_metric(b"val_acc\n" + b"1" * 140_000 + b"\n")

    @pytest.mark.parametrize("source", [[0.5, 10 ** 400], (0.5, 10 ** 400), np.array([0.5, 10 ** 400], dtype=object)])
    def test_huge_integers(self, source):
        """An integer beyond the float range names its index and the range (OverflowError before)."""
        with pytest.raises(ScheduleError, match=r"^read_metric: source\[1\] must be a number within the float range "
                                                r"\(\|x\| <= 1.8e308\), got an integer of about 401 digits"):
            read_metric(source)

    def test_longdouble_beyond_float64(self):
        """A longdouble array with a value float64 cannot hold is refused, not silently made inf."""
        big = np.array([0.5, np.longdouble("1e4000")], dtype=np.longdouble)
        if np.isinf(big[1]):
            pytest.skip("longdouble is float64 on this platform")
        with pytest.raises(ScheduleError, match=r"source\[1\] must be a number within the float range"):
            read_metric(big)

    def test_masked_entry_is_a_missing_evaluation(self):
        """A masked entry is refused with its index (decision: it is a missing evaluation, not a value)."""
        m = np.ma.masked_array([0.5, 0.6, 0.7, 0.8], mask=[0, 1, 0, 1])
        with pytest.raises(ScheduleError, match=r"^read_metric: source\[1\] must be a number, got 'a masked entry' "
                                                r"\(2 masked entries; a masked entry is a missing evaluation"):
            read_metric(m)

    def test_masked_array_without_masked_entries(self):
        """Nothing masked: the values, as a plain float64 array (before: a MaskedArray came back)."""
        m = np.ma.masked_array([1, 2, 3], mask=[0, 0, 0])
        out = read_metric(m)
        assert type(out) is np.ndarray and out.dtype == np.float64 and out.tolist() == [1.0, 2.0, 3.0]
        assert type(read_metric(np.ma.masked_array([0.5, 0.6]))) is np.ndarray

    def test_array_is_copied(self):
        """The history is the reader's own copy: changing the caller's array later does not change it."""
        a = np.array([0.5, 0.6])
        out = read_metric(a)
        a[0] = 9.0
        assert out[0] == 0.5

    def test_fifo_is_refused_without_blocking(self, tmp_path):
        """A FIFO would block the open (no writer) or never end."""
        import os
        import threading

        fifo = tmp_path / "metrics.csv"
        os.mkfifo(fifo)
        box = {}

        def go():
            try:
                read_metric(fifo)
            except ScheduleError as exc:
                box["error"] = str(exc)
        worker = threading.Thread(target=go, daemon=True)
        worker.start()
        worker.join(10)
        assert not worker.is_alive(), "read_metric blocked on a FIFO"
        assert "it is a pipe (FIFO); only regular files are read" in box["error"]

    def test_device_is_refused(self):
        import os

        if not os.path.exists("/dev/zero"):
            pytest.skip("no /dev/zero here")
        with pytest.raises(ScheduleError, match=r"source must be an existing CSV file, got '/dev/zero' \(it is a "
                                                r"character device"):
            read_metric("/dev/zero")

    def test_size_cap(self, tmp_path):
        """A file over 64 MiB is refused before it is read (a sparse file: no disk used)."""
        from schedwidget.metrics import MAX_METRIC_BYTES

        p = tmp_path / "huge.csv"
        with open(p, "wb") as fh:
            fh.truncate(MAX_METRIC_BYTES + 1)
        with pytest.raises(ScheduleError, match=r"\(it has 67,108,865 bytes; at most 67,108,864 bytes \(64 MiB\) "
                                                r"are read\)"):
            read_metric(p)

    def test_path_types(self):
        """An int is neither a path nor a history."""
        with pytest.raises(ScheduleError, match=r"read_metric: source must be a list, tuple or 1-D array"):
            read_metric(3)

    def test_pandas_huge_integers(self):
        pd = pytest.importorskip("pandas")
        with pytest.raises(ScheduleError, match=r"source must be a Series of numbers"):
            read_metric(pd.Series([1, 10 ** 400], dtype=object))


class TestDemoHistories:
    """The shipped demo files are invented, labelled as such, and regenerate from their seed."""

    @pytest.mark.parametrize("name", sorted(DEMO_NAMES))
    def test_regenerates_the_shipped_file(self, name):
        """make_demo_histories + demo_csv give the shipped file byte for byte."""
        assert demo_csv(name, make_demo_histories()[name]) == demo_path(name).read_text(encoding="utf-8")

    @pytest.mark.parametrize("name", sorted(DEMO_NAMES))
    def test_labelled_and_shaped(self, name):
        """Each file says it is invented and holds 90 accuracies in [0, 1]."""
        text = demo_path(name).read_text(encoding="utf-8")
        assert text.startswith("# invented demo data:")
        values = read_metric(demo_path(name))
        assert values.shape == (90,) and np.all((values >= 0) & (values <= 1))

    def test_seed_matters(self):
        """Another seed gives other noise."""
        assert not np.array_equal(make_demo_histories(1)["a"], make_demo_histories(2)["a"])

    def test_unknown_name(self):
        """An unknown demo name lists the known ones."""
        with pytest.raises(ScheduleError, match=r"demo_path: name must be one of 'a', 'b', 'c', got 'd'"):
            demo_path("d")
