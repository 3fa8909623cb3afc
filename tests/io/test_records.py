"""Reading records: delimiters, decimal commas, kinds, ids."""

import numpy as np
import pytest

from splitter.errors import InputError
from splitter.io.records import read_records


def test_semicolon_csv_with_decimal_commas(tmp_path):
    p = tmp_path / "r.csv"
    p.write_text("id;Lat;Lon;kind\na;45,5;10,25;1\nb;46,0;11,0;0\n", encoding="utf-8")
    r = read_records(p, id_column="id")
    # reference: analytic — the values as written, with the decimal comma read as a point
    assert np.allclose(r.points.x, [10.25, 11.0]) and np.allclose(r.points.y, [45.5, 46.0])
    assert r.kind.tolist() == ["presence", "background"]  # 1/0 kinds; 0 is background (our documented choice)


def test_tab_separated_and_unknown_kinds_are_dropped_not_lost(tmp_path):
    p = tmp_path / "r.tsv"
    p.write_text("x\ty\tkind\n10\t45\tpresence\n11\t46\tmaybe\n", encoding="utf-8")
    r = read_records(p)
    assert len(r) == 2 and r.dropped.tolist() == ["", "unknown-kind"]


def test_empty_id_is_refused(tmp_path):
    p = tmp_path / "r.csv"
    p.write_text("record_id,lon,lat\n,10,45\nb,11,46\n", encoding="utf-8")
    with pytest.raises(InputError, match="row 2"):
        read_records(p)
