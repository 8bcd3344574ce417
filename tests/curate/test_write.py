"""Writing release tables: SQL types from the frame, row order (pipeline.curate)."""
from __future__ import annotations

import duckdb
import numpy as np
import pandas as pd
import pytest

from pipeline.curate import _sorted, write_table


def test_write_table_types_and_nulls():
    """Object columns are typed by their values (all booleans → BOOLEAN, all numbers →
    DOUBLE, all null → the NULL type, anything else → VARCHAR of str(v)); text columns →
    VARCHAR; NaN and None → NULL; every column gets a comment."""
    df = pd.DataFrame({
        "flag": pd.Series([True, np.bool_(False), None], dtype=object),
        "num": pd.Series([1, 2.5, None], dtype=object),
        "empty": pd.Series([None, np.nan, None], dtype=object),
        "text": pd.Series(["a", np.nan, None], dtype=object),
        "mixed": pd.Series([1, "x", None], dtype=object),
        "label": pd.Series(["p", np.nan, "q"]),
        "t_k": [300.0, np.nan, 500.0],
        "n": [1, 2, 3],
        "dof": pd.array([1, None, 3], dtype="Int64"),
    })
    con = duckdb.connect()
    write_table(con, "side", df, {"side": ("a side table", {"flag": "a flag"})})
    types = dict((r[0], r[1]) for r in con.execute("DESCRIBE side").fetchall())
    assert types == {"flag": "BOOLEAN", "num": "DOUBLE", "empty": '"NULL"', "text": "VARCHAR",
                     "mixed": "VARCHAR", "label": "VARCHAR", "t_k": "DOUBLE", "n": "BIGINT", "dof": "BIGINT"}
    rows = con.execute("SELECT * FROM side").fetchall()
    assert rows == [(True, 1.0, None, "a", "1", "p", 300.0, 1, 1),
                    (False, 2.5, None, None, "x", None, None, 2, None),
                    (None, None, None, None, None, "q", 500.0, 3, 3)]
    comments = dict(con.execute("SELECT column_name, comment FROM duckdb_columns() WHERE table_name = 'side'").fetchall())
    assert comments["flag"] == "a flag" and comments["t_k"] == "t [K]" and all(comments.values())
    assert con.execute("SELECT comment FROM duckdb_tables() WHERE table_name = 'side'").fetchall() == [("a side table",)]


def _reference_order(df, keys):
    """Row order by ``keys`` (then every column when the key repeats): text as text with
    nulls as "", numbers with NaN first; a stable sort (Python's)."""
    def key_of(c, v):
        if df[c].dtype == object or str(df[c].dtype) in ("str", "string"):
            return "" if v is None or (isinstance(v, float) and np.isnan(v)) else str(v)
        return (0, 0.0) if np.isnan(v) else (1, v)
    cols = list(keys) if not df.duplicated(keys).any() else list(dict.fromkeys(keys + list(df.columns)))
    vals = {c: df[c].tolist() for c in cols}
    return sorted(range(len(df)), key=lambda i: tuple(key_of(c, vals[c][i]) for c in cols))


@pytest.mark.parametrize("seed", range(6))
def test_sorted_orders_rows_by_key_and_keeps_sorted_frames(seed):
    """Frames already in key order (unique key: returned as they are), shuffled frames and
    frames whose key repeats all come out in the reference order."""
    rng = np.random.default_rng(seed)
    n = 200
    pool = np.array(["a", "b", "B", "ä", "", None, "10", "9"], dtype=object)
    df = pd.DataFrame({"s": pd.Series(pool[rng.integers(0, len(pool), n)], dtype="str"),
                       "x": rng.integers(0, 5 if seed % 2 else 10_000, n).astype(float),
                       "i": rng.integers(0, 3, n)})
    if seed == 3:
        df.loc[5, "x"] = np.nan
    for frame in (df, df.sort_values(["s", "x"], na_position="first"),
                  df.drop_duplicates(["s", "x"]).sort_values(["s", "x"], na_position="first")):
        for keys in (["s", "x"], ["x", "i"], ["s"]):
            got = _sorted(frame, keys)
            want = frame.iloc[_reference_order(frame, keys)].reset_index(drop=True)
            pd.testing.assert_frame_equal(got, want)


def _parquet_copies(tmp_path, name, df):
    """The Parquet copy of ``df`` made by :func:`write_parquet` and DuckDB's ``COPY`` of
    the table :func:`write_table` stored: (pyarrow's, DuckDB's) as pyarrow read them."""
    import pyarrow.parquet as pq

    from pipeline.curate import arrow_frame, parquet_ready, write_parquet

    frame = arrow_frame(df)
    ready = parquet_ready(frame)
    con = duckdb.connect()
    write_table(con, name, frame)
    con.execute(f"COPY \"{name}\" TO '{(tmp_path / 'duck.parquet').as_posix()}' (FORMAT parquet)")
    if ready is None:
        return None, pq.read_table(tmp_path / "duck.parquet")
    write_parquet(ready, tmp_path / "arrow.parquet")
    return pq.read_table(tmp_path / "arrow.parquet"), pq.read_table(tmp_path / "duck.parquet")


@pytest.mark.parametrize("rows", [slice(None), slice(0, 2)])
def test_parquet_copy_equals_duckdb_copy(tmp_path, rows):
    """The Parquet copy written from the Arrow table is what DuckDB's COPY of the stored
    table writes: the same column types, the same nullability (a column without a null is
    required, as DuckDB marks it; every column of an empty table too) and the same values
    (NaN stored as null). An empty table with an all-null object column (SQL type NULL,
    which Arrow cannot mark required) is left to DuckDB's COPY."""
    df = pd.DataFrame({
        "key": ["a", "b", "c", "d"],
        "text": pd.Series(["x", None, "z", np.nan], dtype=object),
        "label": pd.Series(["p", "q", np.nan, "r"]),
        "t_k": [300.0, 400.0, np.nan, -0.0],
        "n": [1, 2, 3, 4],
        "flag": [True, False, True, True],
        "maybe": pd.Series([True, False, None, True], dtype=object),
        "num": pd.Series([1, 2.5, None, 3], dtype=object),
        "dof": pd.array([1, 2, None, 4], dtype="Int64"),
    }).iloc[rows].reset_index(drop=True)
    ours, duck = _parquet_copies(tmp_path, "side", df)
    assert ours is not None
    assert ours.schema == duck.schema
    assert ours.equals(duck)
    assert [f.nullable for f in ours.schema] == [bool(df[c].isna().any()) for c in df.columns]
    typed = df[["label", "t_k", "n", "flag", "dof"]].iloc[:0]
    ours, duck = _parquet_copies(tmp_path, "typed_empty", typed)
    assert ours is not None and ours.num_rows == 0
    assert ours.schema == duck.schema and not any(f.nullable for f in ours.schema)
    ours, duck = _parquet_copies(tmp_path, "empty", df.iloc[:0])  # object columns: SQL type NULL
    assert ours is None and duck.num_rows == 0


def test_release_parquet_copies_equal_duckdb_copies(release, tmp_path):
    """Every Parquet copy of the test release equals DuckDB's COPY of the table in the
    release's own thermo.duckdb (schema with nullability, and values)."""
    import pyarrow.parquet as pq

    _, out = release
    con = duckdb.connect(str(out / "thermo.duckdb"), read_only=True)
    names = [r[0] for r in con.execute("SELECT table_name FROM duckdb_tables()").fetchall()]
    assert {"properties", "reactions", "fits", "findings"} <= set(names)
    for name in names:
        target = tmp_path / f"{name}.duck.parquet"
        con.execute(f"COPY \"{name}\" TO '{target.as_posix()}' (FORMAT parquet)")
        ours, duck = pq.read_table(out / "parquet" / f"{name}.parquet"), pq.read_table(target)
        assert ours.schema == duck.schema, name
        assert ours.equals(duck), name
