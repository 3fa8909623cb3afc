"""Reading a user's prediction table: delimiters, decimal commas, missing scores, refusals."""

import numpy as np
import pandas as pd
import pytest

from splitter.errors import InputError
from splitter.io.prediction_table import read_prediction_table


def _table(n=50, seed=3):
    rng = np.random.default_rng(seed)
    return pd.DataFrame({"record_id": [f"r{i}" for i in range(n)] * 2, "fold": ["1"] * n + ["2"] * n,
                         "prediction": rng.random(2 * n).round(6)})


def test_a_spreadsheet_export_reads_as_the_plain_csv(tmp_path):
    t = _table()
    t.to_csv(tmp_path / "plain.csv", index=False)
    t.to_csv(tmp_path / "semi.csv", index=False, sep=";", decimal=",")  # a spreadsheet in a decimal-comma locale
    t.rename(columns=str.upper).to_csv(tmp_path / "tabs.tsv", index=False, sep="\t")
    # reference: pandas.read_csv of the plain file (outside the reader under test)
    want = pd.read_csv(tmp_path / "plain.csv", dtype={"record_id": str, "fold": str})
    for name in ("plain.csv", "semi.csv", "tabs.tsv"):
        got = read_prediction_table(tmp_path / name)
        assert got.record_id.tolist() == want.record_id.tolist() and got.fold.tolist() == want.fold.tolist()
        np.testing.assert_array_equal(got.prediction.to_numpy(), want.prediction.to_numpy())


@pytest.mark.parametrize("blank", ["", "NA", "nan", "NULL", "-", " na "])
def test_missing_scores_are_missing(tmp_path, blank):
    p = tmp_path / "p.csv"
    p.write_text(f"record_id,fold,prediction\na,1,0.5\nb,1,{blank}\n", encoding="utf-8")
    assert np.isnan(read_prediction_table(p).prediction.to_numpy()).tolist() == [False, True]


@pytest.mark.parametrize("value", ["high", "0.5.1", "1,234.5", "TRUE"])
def test_a_score_that_is_not_a_number_is_refused_with_its_row(tmp_path, value):
    p = tmp_path / "p.csv"
    p.write_text(f'record_id,fold,prediction\na,1,0.5\nb,1,"{value}"\n', encoding="utf-8")
    with pytest.raises(InputError, match=rf"p.csv: row 3: prediction '{value}' is not a number"):
        read_prediction_table(p)


def test_two_scores_for_one_record_and_fold_are_refused(tmp_path):
    p = tmp_path / "p.csv"
    # the same record in two folds is fine; twice in one fold is not
    p.write_text("record_id,fold,prediction\na,1,0.5\na,2,0.4\nb,1,0.3\na,1,0.9\n", encoding="utf-8")
    with pytest.raises(InputError, match=r"record 'a' has more than one prediction for fold '1' \(rows 2, 5\)"):
        read_prediction_table(p)


def test_a_missing_column_names_the_columns_found(tmp_path):
    p = tmp_path / "p.csv"
    p.write_text("id,fold,score\na,1,0.5\n", encoding="utf-8")
    with pytest.raises(InputError, match=r"missing column\(s\) record_id, prediction; .*columns are: id, fold, score"):
        read_prediction_table(p)
