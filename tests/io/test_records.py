"""Reading records: delimiters, decimal commas, kinds, ids."""

import re

import numpy as np
import pytest

from splitter.errors import InputError
from splitter.io.records import read_records


def test_semicolon_csv_with_decimal_commas(tmp_path):
    p = tmp_path / "r.csv"
    p.write_text("id;Lat;Lon;kind\na;45,5;10,25;1\nb;46,0;11,0;0\n", encoding="utf-8")
    r = read_records(p, id_column="id", zero_means="background")
    # reference: analytic — the values as written, with the decimal comma read as a point
    assert np.allclose(r.points.x, [10.25, 11.0]) and np.allclose(r.points.y, [45.5, 46.0])
    assert r.kind.tolist() == ["presence", "background"]  # 1/0 kinds read as the caller said


@pytest.mark.parametrize("one,zero", [("1", "0"), ("TRUE", "FALSE"), ("yes", "no"), ("1.0", "0.0")])
def test_zero_one_kinds_need_zero_means_and_follow_it(tmp_path, one, zero):
    p = tmp_path / "r.csv"
    p.write_text(f"x,y,pa\n10,45,{one}\n11,46,{zero}\n12,46,absence\n", encoding="utf-8")
    with pytest.raises(InputError, match="zero_means.*'absence'.*'background'"):
        read_records(p, kind_column="pa")  # never guessed
    for meaning in ("absence", "background"):
        r = read_records(p, kind_column="pa", zero_means=meaning)
        # reference: analytic — 1 is presence, 0 what the caller said, words as written
        assert r.kind.tolist() == ["presence", meaning, "absence"]
    with pytest.raises(InputError, match="zero_means='nothing'"):
        read_records(p, kind_column="pa", zero_means="nothing")


def test_words_need_no_zero_means(tmp_path):
    p = tmp_path / "r.csv"
    p.write_text("x,y,kind\n10,45,presence\n11,46,absence\n12,46,background\n", encoding="utf-8")
    assert read_records(p).kind.tolist() == ["presence", "absence", "background"]  # analytic: as written


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


def test_covariate_numbers_match_pandas_parsing():
    """Covariate columns read as text: the one-call cast of plain numbers and the forgiving
    path (spaces, decimal commas, blanks) give what pandas.to_numeric gives on the cleaned text
    (reference: pandas, after the clean-up written out here)."""
    import pandas as pd

    from splitter.io.records import covariate_numbers

    rng = np.random.default_rng(2)
    plain = pd.Series(np.char.mod("%.6g", rng.normal(0, 1e3, 5000)).astype(str)).astype("str")
    expected = pd.to_numeric(plain).to_numpy(float)
    np.testing.assert_array_equal(covariate_numbers(plain), expected)
    messy = pd.Series([" 12,5", "3", "", "-1e2", "x", "7.25 "]).astype("str")
    cleaned = messy.str.strip().str.replace(",", ".", regex=False)
    np.testing.assert_array_equal(covariate_numbers(messy), pd.to_numeric(cleaned, errors="coerce").to_numpy(float))


@pytest.mark.parametrize("name", ["kind", "Kind", "occurrenceStatus", "OCCURRENCESTATUS"])
def test_the_kind_column_is_found_by_its_usual_names(tmp_path, name):
    # occurrenceStatus is Darwin Core's term, its values present / absent (Darwin Core: An
    # Evolving Community-Developed Biodiversity Data Standard, PLoS ONE, 2012; recalled from memory)
    p = tmp_path / "r.tsv"
    p.write_text(f"decimalLongitude\tdecimalLatitude\t{name}\n10\t45\tPRESENT\n11\t46\tABSENT\n", encoding="utf-8")
    assert read_records(p).kind.tolist() == ["presence", "absence"]  # analytic: as written


def test_kind_words_under_another_name_are_never_passed_over(tmp_path):
    p = tmp_path / "r.csv"
    p.write_text("x,y,status\n10,45,present\n11,46,absent\n", encoding="utf-8")
    with pytest.raises(InputError, match=r"r.csv: column 'status' holds absent, present; give kind_column='status'"):
        read_records(p)
    assert read_records(p, kind_column="status").kind.tolist() == ["presence", "absence"]
    assert read_records(p, kind_column="none").kind.tolist() == ["presence", "presence"]  # said outright


def test_a_column_that_only_repeats_the_default_kind_is_no_kind_column(tmp_path):
    # A presence-only table with a "present" note, a background file labelled "background":
    # every row is what it would be anyway, so no column need be named.
    p = tmp_path / "r.csv"
    p.write_text("x,y,note\n10,45,present\n11,46,present\n", encoding="utf-8")
    assert read_records(p).kind.tolist() == ["presence", "presence"]
    b = tmp_path / "b.csv"
    b.write_text("x,y,source\n10,45,background\n11,46,\n", encoding="utf-8")
    assert read_records(b, default_kind="background").kind.tolist() == ["background", "background"]


@pytest.mark.parametrize("name", ["present", "PA", "presence_absence", "Occurrence", "p/a"])
def test_a_survey_zero_one_column_is_never_passed_over(tmp_path, name):
    # 0/1 under a presence-like name: without a kind column its zeros would be read as presences
    p = tmp_path / "r.csv"
    p.write_text(f'x,y,"{name}"\n10,45,1\n11,46,0\n12,46,1.0\n', encoding="utf-8")
    with pytest.raises(InputError, match=rf"column '{re.escape(name)}' holds 0, 1; give kind_column='{re.escape(name)}' "
                                         r"and say what 0 means with zero_means"):
        read_records(p)
    assert read_records(p, kind_column=name, zero_means="absence").kind.tolist() == ["presence", "absence", "presence"]
    with pytest.raises(InputError, match="or kind_column='none' to take every row as a presence"):
        read_records(p)
    assert read_records(p, kind_column="none").kind.tolist() == ["presence"] * 3


def test_zero_one_columns_of_other_names_or_all_ones_are_left_alone(tmp_path):
    p = tmp_path / "r.csv"
    p.write_text("x,y,visited,pa,status\n10,45,1,1,1\n11,46,0,1,0\n", encoding="utf-8")
    assert read_records(p).kind.tolist() == ["presence", "presence"]  # visited, status: not kinds by name; pa: presences only


def test_easting_and_northing_are_found_and_need_their_crs(tmp_path):
    p = tmp_path / "r.csv"
    p.write_text("site,Easting,Northing\na,412000.5,5001000.0\nb,430000.0,5020000.0\n", encoding="utf-8")
    with pytest.raises(InputError, match="latitudes outside -90..90.*--crs|crs"):
        read_records(p)  # EPSG:4326 by default: these are not degrees
    r = read_records(p, crs="EPSG:32632")
    assert (r.x_column, r.y_column) == ("Easting", "Northing")
    np.testing.assert_array_equal(r.points.x, [412000.5, 430000.0])  # analytic: the values as written


def test_several_species_among_the_presences_are_said(tmp_path):
    p = tmp_path / "r.csv"
    p.write_text("x,y,kind,scientificName\n10,45,presence,A a\n11,46,presence,B b\n12,46,background,C c\n"
                 "13,46,presence,A a\n", encoding="utf-8")
    (note,) = [n for n in read_records(p).notes if "species" in n]
    assert "column 'scientificName' names 2 species among the presences (A a, B b)" in note  # background not counted
    q = tmp_path / "q.csv"
    q.write_text("x,y,species\n10,45,A a\n11,46,A a\n", encoding="utf-8")
    assert not [n for n in read_records(q).notes if "species" in n]


def test_columns_given_in_another_case_are_found(tmp_path):
    # A spreadsheet's capitalised header: every option names the column as the user thinks of it.
    p = tmp_path / "r.csv"
    p.write_text("Record_ID,East,North,Status\na,10,45,present\nb,11,46,absent\n", encoding="utf-8")
    r = read_records(p, x="east", y="NORTH", kind_column="status")
    assert (r.x_column, r.y_column) == ("East", "North")
    assert r.record_id.tolist() == ["a", "b"] and r.kind.tolist() == ["presence", "absence"]  # Record_ID by default
    q = tmp_path / "q.csv"
    q.write_text("site,SITE,x,y\na,b,10,45\n", encoding="utf-8")
    with pytest.raises(InputError, match="no id column 'Site'"):
        read_records(q, id_column="Site")  # two columns match in another case: none is guessed


def test_a_background_file_is_refused_only_for_values_that_are_not_background(tmp_path):
    # A background file's 0 column agrees with it (and no kind option reaches that file); a 1
    # or the word "presence" in it would be read as background, so it is refused.
    b = tmp_path / "b.csv"
    b.write_text("x,y,pa\n10,45,0\n11,46,0\n", encoding="utf-8")
    assert read_records(b, default_kind="background").kind.tolist() == ["background", "background"]
    b.write_text("x,y,pa\n10,45,0\n11,46,1\n", encoding="utf-8")
    with pytest.raises(InputError, match=r"b.csv: column 'pa' holds 0, 1, but every row of a background file is read"):
        read_records(b, default_kind="background")
    b.write_text("x,y,status\n10,45,background\n11,46,presence\n", encoding="utf-8")
    with pytest.raises(InputError, match="give presences and absences in the records file"):
        read_records(b, default_kind="background")
