"""Output writers: atomic files, formula-injection guard, JSON."""

import json
import os

import numpy as np
import pandas as pd
import pytest

from heatsight.data_io import csv_out
from heatsight.data_io.errors import InputError


@pytest.mark.parametrize("cell, expected", [
    ("=SUM(A1:A3)", "'=SUM(A1:A3)"),
    ("+1", "'+1"),
    ("-TC1", "'-TC1"),
    ("@cmd", "'@cmd"),
    ("\tTC", "'\tTC"),
    ("\rTC", "'\rTC"),
    ("TC1", "TC1"),
    ("", ""),
    (-3.5, -3.5),
])
def test_neutralize(cell, expected):
    assert csv_out.neutralize(cell) == expected


def test_csv_text_neutralizes_text_not_numbers():
    fr = pd.DataFrame({"sensor": ["=1+1", "TC2"], "residual": [-1.5, 2.0]})
    text = csv_out.csv_text(fr)
    assert text.splitlines() == ["sensor,residual", "'=1+1,-1.5", "TC2,2"]


def test_write_csv_atomic_replaces(tmp_path):
    p = tmp_path / "out.csv"
    p.write_text("old\n")
    csv_out.write_csv(pd.DataFrame({"a": [1.0]}), p)
    assert p.read_text() == "a\n1\n"
    assert [f.name for f in tmp_path.iterdir()] == ["out.csv"]


def test_failed_write_leaves_nothing(tmp_path, monkeypatch):
    p = tmp_path / "out.csv"
    p.write_text("old\n")

    def boom(src, dst):
        raise OSError("disk full")

    monkeypatch.setattr(os, "replace", boom)
    with pytest.raises(OSError):
        csv_out.write_csv(pd.DataFrame({"a": [1.0]}), p)
    assert p.read_text() == "old\n"
    assert [f.name for f in tmp_path.iterdir()] == ["out.csv"]


def test_write_csv_to_stream():
    import io
    buf = io.StringIO()
    csv_out.write_csv(pd.DataFrame({"a": [0.1]}), None, stream=buf)
    assert buf.getvalue() == "a\n0.1\n"


def test_json_plain_values(tmp_path):
    p = tmp_path / "summary.json"
    csv_out.write_json({"mean": np.float64(1.5), "n": np.int64(3), "bad": float("nan"),
                        "arr": np.array([1.0, np.inf]), "ok": np.bool_(True)}, p)
    assert json.loads(p.read_text()) == {"mean": 1.5, "n": 3, "bad": None, "arr": [1.0, None], "ok": True}


def test_output_set_all_or_nothing(tmp_path):
    with csv_out.OutputSet(tmp_path) as out:
        out.add("a.csv", "x\n")
        out.add("b.json", "{}\n")
    assert sorted(f.name for f in tmp_path.iterdir()) == ["a.csv", "b.json"]
    sub = tmp_path / "sub"
    sub.mkdir()
    with pytest.raises(RuntimeError):
        with csv_out.OutputSet(sub) as out:
            out.add("a.csv", "x\n")
            raise RuntimeError("failed half way")
    assert list(sub.iterdir()) == []


def test_check_output_path(tmp_path):
    inp = tmp_path / "case.toml"
    inp.write_text("x")
    with pytest.raises(InputError, match="is an input file"):
        csv_out.check_output_path(inp, [inp])
    with pytest.raises(InputError, match="does not exist"):
        csv_out.check_output_path(tmp_path / "no" / "out.csv")
    with pytest.raises(InputError, match="is a folder"):
        csv_out.check_output_path(tmp_path)
    assert csv_out.check_output_path(tmp_path / "out.csv", [inp]) == tmp_path / "out.csv"
