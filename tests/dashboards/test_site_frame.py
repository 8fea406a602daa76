"""dashboards.site.frame reads a SELECT through Arrow into the frame DuckDB's .df() gives."""

from __future__ import annotations

import duckdb
import pandas as pd
import pytest

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
