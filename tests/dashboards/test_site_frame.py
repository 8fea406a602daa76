"""dashboards.site.frame reads a SELECT through Arrow into the frame DuckDB's .df() gives."""

from __future__ import annotations

import duckdb
import pandas as pd
import pytest

from dashboards import site
from dashboards.site import frame

# every kind of column the dashboard SELECTs return, with and without NULLs, a column of NULLs
# only, and kinds left to .df() (decimal, hugeint, interval, list)
_ROWS = """
select * from (values
  (1::int, 1::bigint, null::bigint, 1.5::double, 1.5::float, 'a', null::varchar, true, null::boolean,
   date '2026-01-02', timestamp '2026-01-02 03:04:05.25', 7::tinyint, 3::ubigint, 'x, "y"'),
  (null, 2, null, null, 2.5, null, null, false, true, null, null, 8, 4, ''),
  (3, 3, null, 'nan'::double, null, 'c', null, true, false, date '2026-02-01',
   timestamp '2026-02-01 00:00:00', 9, 5, 'z')
) t(i, bi, bin, d, f, s, sn, b, bn, dt, ts, ti, ubi, txt)
"""


@pytest.mark.parametrize("select", [
    _ROWS,
    f"select * from ({_ROWS}) where false",                      # no rows
    "select 1.5::decimal(10, 2) as dec, 2::hugeint as h, 'a' as s",   # read by .df()
    "select interval 1 day as iv, [1, 2] as li, 1 as n",
    "select $n::int as n, 'b' as s",
])
def test_frame_is_what_df_gives(select):
    con = duckdb.connect()
    params = {"n": 4} if "$n" in select else None
    got = frame(con, select, params)
    want = con.execute(select, params).df()
    pd.testing.assert_frame_equal(got, want, check_exact=True)
    assert list(got.columns) == list(want.columns)


# labels repeated over many rows (NULL, an empty text, accents, case, a comma), one text per row,
# and a text column of NULLs only; more rows than one Arrow batch of the read
_LABELS = """
select ['b', 'a', null, 'B', 'é', '', 'a, b', 'z'][1 + (i % 8)::int] as label,
       'uid-' || i as uid, null::varchar as none, i as n
from range(200000) t(i)
"""


def test_frame_holds_repeated_labels_as_categoricals_that_read_as_the_texts():
    """frame(categorical=True): a text column of at most one distinct value per two rows is a
    categorical whose categories are sorted as pandas sorts the texts; its values, sort order
    and groups are those of the text column; other columns are as frame() gives them."""
    con = duckdb.connect()
    got, want = frame(con, _LABELS, categorical=True), frame(con, _LABELS)
    assert isinstance(got["label"].dtype, pd.CategoricalDtype)
    assert list(got["label"].cat.categories) == sorted(want["label"].dropna().unique())
    assert got["label"].tolist()[:16] == want["label"].tolist()[:16]   # NaN for NULL, both
    assert got["label"].isna().sum() == want["label"].isna().sum() == 25000
    order = ["label", "n"]
    assert (got.sort_values(order)["n"].tolist() == want.sort_values(order)["n"].tolist())
    assert (got.groupby("label")["n"].sum().to_dict() == want.groupby("label")["n"].sum().to_dict())
    pd.testing.assert_frame_equal(got.drop(columns="label"), want.drop(columns="label"),
                                  check_exact=True)
    pd.testing.assert_series_equal(got["label"].astype("str"), want["label"])
    # the same categoricals made from the frame of text (the funnel points, read as text first)
    pd.testing.assert_frame_equal(site._categorical_frame(want), got, check_exact=True)
