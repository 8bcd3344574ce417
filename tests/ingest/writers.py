"""Writers of the raw formats, for round-trip tests (write → read → same numbers).

The NASA writers are the project's own (``pipeline.export``), written from the published
layouts independently of the readers:

* NASA 7-term: McBride, Gordon & Reno, NASA TM-4513 (1993), four 80-column lines,
  line 1 (A18, A6, 4(A2, I3), A1, 2F10.3, F8.3, 6X, I1), lines 2-4 (5E15.8 | 4E15.8, 4X, I1).
* NASA 9-term: McBride, Zehe & Gordon, NASA/TP-2002-211556 (2002), Appendix A:
  (I2, 1X, A6, 1X, 5(A2, F6.2), I2, F13.5, F15.3); (2F11.3, I1, 8F5.1, 2X, F15.3);
  (5D16.9); (2D16.9, 16X, 2D16.9).
"""
from __future__ import annotations

import numpy as np

from pipeline.export import NASA9_EXPONENTS, nasa7_text, nasa9_text


def nasa7_record(name: str, elements: dict, phase: str, t_low: float, t_mid: float, t_high: float,
                 upper, lower, date: str = "TEST") -> str:
    """Four lines of a classic-layout NASA 7-term record (the project's own writer)."""
    return nasa7_text(name, date, list(elements.items()), phase, t_low, t_mid, t_high, lower, upper)


def nasa9_record(name: str, elements: dict, phase: int, molar_mass: float, dfh: float,
                 intervals, comment: str = "test record", ref: str = "g 1/02",
                 exponents=NASA9_EXPONENTS) -> str:
    """A NASA 9-term record; ``intervals`` is a list of (t_low, t_high, a1..a7, b1, b2)."""
    iv = np.asarray(intervals, float)
    return nasa9_text(name, comment, ref, list(elements.items()), phase, molar_mass, dfh,
                      iv[:, 2:], iv[:, 0], iv[:, 1], h298_minus_h0=0.0, exponents=exponents)


NASA9_HEADER = "thermo\n    200.000  1000.000  6000.000 20000.000   9/09/04"


def csv_text(header: list[str], rows: list[list]) -> str:
    """A CSV text; cells holding commas are quoted."""
    def cell(v):
        s = "" if v is None else (repr(float(v)) if isinstance(v, float) else str(v))
        return f'"{s}"' if ("," in s or '"' in s) else s
    return "\n".join([",".join(header)] + [",".join(cell(v) for v in r) for r in rows]) + "\n"
