"""SQL macros stored in ``thermo.duckdb``: any species' properties at any T, in plain SQL.

``preferred_segments`` holds, per species, the canonical segments (NASA/TP-2002-211556
9-term form) of its preferred record — or, for a species whose preferred record is a
table, the segments of its constrained NASA-9 refit (:mod:`pipeline.refit`; residuals in
the ``fits`` table), so that every species is evaluated the same way. A refit covers the
table from max(its lowest T, 200 K) up (:data:`pipeline.refit.T_FIT_MIN_K`); below that,
as outside any range, the macros extrapolate the end segment — cryogenic values of a table
are in ``table_points`` and ``properties``. A table spanning less than 10 K above 200 K is
not refitted and has no macro values (NULL). The scalar macros

    cp(species, t_k) [J/(mol*K)], h(species, t_k) [J/mol], s(species, t_k) [J/(mol*K)],
    g(species, t_k) [J/mol]

pick the segment whose range holds T (the lower one at a joint; below the first segment
the first, above the last the last — polynomials extrapolate, as the Python evaluator
:class:`pipeline.thermo.SegmentIndex` does) and evaluate it with the same Horner forms as
:func:`pipeline.thermo.evaluate`. ``h`` and ``g`` are NULL for a refit table whose
absolute enthalpy is unknown (no ΔfH at 298.15 K). The table macro
``props(species, t_from, t_to, t_step)`` returns species, t_k, cp, h, s, g, h − h298 and
gef over a grid. Literals are cast ``::DOUBLE`` (a bare decimal literal is DECIMAL in
DuckDB 2.0) so the macros compute in double precision.
"""
from __future__ import annotations

import duckdb
import numpy as np
import pandas as pd

from .constants import R, T_REF
from .thermo import COEF_COLUMNS

PREFERRED_SEGMENT_COLUMNS = ("species", "record_id", "origin", "segment", "t_low_k", "t_high_k",
                             *COEF_COLUMNS, "is_last", "h_defined")


def preferred_segments(preferred: pd.DataFrame, records: pd.DataFrame, segments: pd.DataFrame,
                       refit_segments: pd.DataFrame | None = None,
                       h_defined: dict | None = None) -> pd.DataFrame:
    """Segments the macros evaluate, one set per species.

    preferred : ``species, preferred_record_id``; refit_segments : segments of refits keyed
    by the *table* record id they replace; h_defined : table record id → whether its
    absolute H is known (polynomials always are).
    """
    pr = preferred.dropna(subset=["preferred_record_id"])[["species", "preferred_record_id"]]
    pr = pr.rename(columns={"preferred_record_id": "record_id"})
    kind = records.set_index("record_id")["kind"]
    poly = pr[pr["record_id"].map(kind).eq("polynomial").to_numpy()]
    parts = [poly.merge(segments, on="record_id").assign(origin="record", h_defined=True)]
    if refit_segments is not None and len(refit_segments):
        tab = pr[pr["record_id"].map(kind).eq("table").to_numpy()]
        rs = tab.merge(refit_segments, on="record_id").assign(origin="refit")
        rs["h_defined"] = rs["record_id"].map(h_defined or {}).fillna(False).astype(bool)
        parts.append(rs)
    out = pd.concat(parts, ignore_index=True)
    if not len(out):
        return pd.DataFrame(columns=list(PREFERRED_SEGMENT_COLUMNS))
    out = out.sort_values(["species", "t_low_k", "segment"], kind="stable").reset_index(drop=True)
    out["segment"] = out.groupby("species").cumcount()
    out["is_last"] = out["segment"] == out.groupby("species")["segment"].transform("max")
    out["h_defined"] = out["h_defined"].astype(bool)
    return out[list(PREFERRED_SEGMENT_COLUMNS)]


#: macro name → signature and meaning (written to the ``macros`` table).
MACRO_DOCS: dict[str, str] = {
    "cp": "cp(species, t_k): standard molar heat capacity [J/(mol*K)] of the preferred record",
    "h": "h(species, t_k): absolute enthalpy, H(298.15 K) = ΔfH° [J/mol]; NULL if unknown",
    "s": "s(species, t_k): standard molar entropy [J/(mol*K)]",
    "g": "g(species, t_k): Gibbs energy G = H − TS [J/mol]; NULL if H unknown",
    "h_raw": "h_raw(species, t_k): enthalpy on the segments' own zero [J/mol] (use differences only)",
    "h_minus_h298": "h_minus_h298(species, t_k): H(T) − H(298.15 K) [J/mol]",
    "props": "props(species, t_from, t_to, t_step): table of t_k, cp, h, s, g, h − h298, gef over a grid [SI]",
}


def _d(x: float) -> str:
    return f"({float(x)!r})::DOUBLE"


def _sql_terms(t: str) -> dict[str, str]:
    """Cp/R, H/R, S/R of the row's coefficients at ``t`` (the Horner forms of thermo.evaluate)."""
    inv = f"(1.0::DOUBLE / {t})"
    lnt = f"ln({t})"
    two, three, four, five = (_d(v) for v in (2, 3, 4, 5))
    return {
        "cp": f"(a1 * {inv} * {inv} + a2 * {inv} + (a3 + {t} * (a4 + {t} * (a5 + {t} * (a6 + {t} * a7)))))",
        "h": (f"(-a1 * {inv} + a2 * {lnt} + {t} * (a3 + {t} * (a4 / {two} + {t} * (a5 / {three} + "
              f"{t} * (a6 / {four} + {t} * a7 / {five})))) + b1)"),
        "s": (f"(-a1 * {inv} * {inv} / {two} - a2 * {inv} + a3 * {lnt} + {t} * (a4 + {t} * (a5 / {two} + "
              f"{t} * (a6 / {three} + {t} * a7 / {four}))) + b2)"),
    }


def macro_sql() -> list[str]:
    """The CREATE MACRO statements, in dependency order."""
    t = "(t_k)::DOUBLE"
    r = _d(R)
    e = _sql_terms(t)
    pick = "FROM preferred_segments p WHERE p.species = sp AND ((t_k)::DOUBLE <= p.t_high_k OR p.is_last)"
    body = {
        "cp": f"{r} * {e['cp']}",
        "h": f"CASE WHEN h_defined THEN {r} * {e['h']} END",
        "s": f"{r} * {e['s']}",
        "g": f"CASE WHEN h_defined THEN {r} * {e['h']} - {t} * ({r} * {e['s']}) END",
        "h_raw": f"{r} * {e['h']}",
    }
    stmts = []
    for name, expr in body.items():
        stmts.append(f"CREATE OR REPLACE MACRO {name}(sp, t_k) AS (SELECT arg_min({expr}, p.segment) {pick})")

    t298 = _d(T_REF)
    stmts.append(f"CREATE OR REPLACE MACRO h_minus_h298(sp, t_k) AS h_raw(sp, t_k) - h_raw(sp, {t298})")
    stmts.append(
        "CREATE OR REPLACE MACRO props(sp, t_from, t_to, t_step) AS TABLE "
        "SELECT sp AS species, grid.t_k, cp(sp, grid.t_k) AS cp_j_mol_k, h(sp, grid.t_k) AS h_j_mol, "
        "s(sp, grid.t_k) AS s_j_mol_k, g(sp, grid.t_k) AS g_j_mol, "
        "h_minus_h298(sp, grid.t_k) AS h_minus_h298_j_mol, "
        "s(sp, grid.t_k) - h_minus_h298(sp, grid.t_k) / grid.t_k AS gef_j_mol_k "
        "FROM (SELECT (t_from)::DOUBLE + i * (t_step)::DOUBLE AS t_k FROM generate_series(0, "
        "CAST(floor(((t_to)::DOUBLE - (t_from)::DOUBLE) / (t_step)::DOUBLE + 1e-9::DOUBLE) AS BIGINT)) gs(i)) grid "
        "ORDER BY grid.t_k")
    return stmts


def install(con: duckdb.DuckDBPyConnection) -> None:
    """Create the macros in ``con`` (requires the ``preferred_segments`` table), each with a
    comment that ``SELECT function_name, comment FROM duckdb_functions()`` shows."""
    for stmt in macro_sql():
        con.execute(stmt)
    for name, doc in MACRO_DOCS.items():
        kind = "MACRO TABLE" if name == "props" else "MACRO"
        con.execute(f"COMMENT ON {kind} {name} IS '" + doc.replace("'", "''") + "'")


def evaluate_sql(con: duckdb.DuckDBPyConnection, species, t_k) -> pd.DataFrame:
    """cp, h, s, g of (species, T) pairs through the stored macros (for tests and the CLI)."""
    df = pd.DataFrame({"species": np.asarray(species, dtype=object), "t_k": np.asarray(t_k, float)})
    con.register("_q", df)
    try:
        return con.execute("SELECT species, t_k, cp(species, t_k) AS cp, h(species, t_k) AS h, "
                           "s(species, t_k) AS s, g(species, t_k) AS g FROM _q").df()
    finally:
        con.unregister("_q")
