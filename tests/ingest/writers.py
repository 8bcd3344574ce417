"""Writers of the raw formats, for round-trip tests (write → read → same numbers).

Written from the published layouts, independently of the readers:

* NASA 7-term: McBride, Gordon & Reno, NASA TM-4513 (1993), four 80-column lines,
  line 1 (A18, A6, 4(A2, I3), A1, 2F10.3, F8.3, 6X, I1), lines 2-4 (5E15.8 | 4E15.8, 4X, I1).
* NASA 9-term: McBride, Zehe & Gordon, NASA/TP-2002-211556 (2002), Appendix A:
  (I2, 1X, A6, 1X, 5(A2, F6.2), I2, F13.5, F15.3); (2F11.3, I1, 8F5.1, 2X, F15.3);
  (5D16.9); (2D16.9, 16X, 2D16.9).
"""
from __future__ import annotations


def _e15(x: float) -> str:
    return f"{x:15.8E}"


def _d16(x: float) -> str:
    return f"{x:16.9E}".replace("E", "D")


def nasa7_record(name: str, elements: dict, phase: str, t_low: float, t_mid: float, t_high: float,
                 upper, lower, date: str = "TEST") -> str:
    """Four lines of a classic-layout NASA 7-term record."""
    formula = "".join(f"{el.upper():<2}{int(n):3d}" for el, n in list(elements.items())[:4])
    line1 = (f"{name:<18}{date:<6}{formula:<20}{phase:1}{t_low:10.3f}{t_high:10.3f}{t_mid:8.3f}"
             f"{'':6}1")
    assert len(line1) == 80, len(line1)
    c = list(upper) + list(lower)
    line2 = "".join(_e15(x) for x in c[0:5]) + "    2"
    line3 = "".join(_e15(x) for x in c[5:10]) + "    3"
    line4 = "".join(_e15(x) for x in c[10:14]) + " " * 19 + "4"
    return "\n".join([line1, line2, line3, line4])


def nasa9_record(name: str, elements: dict, phase: int, molar_mass: float, dfh: float,
                 intervals, comment: str = "test record", ref: str = "g 1/02",
                 exponents=(-2.0, -1.0, 0.0, 1.0, 2.0, 3.0, 4.0, 0.0)) -> str:
    """A NASA 9-term record; ``intervals`` is a list of (t_low, t_high, a1..a7, b1, b2)."""
    pairs = "".join(f"{el.upper():<2}{n:6.2f}" for el, n in elements.items())
    pairs = pairs.ljust(40)
    out = [f"{name:<18}{comment}",
           f"{len(intervals):2d} {ref:<6} {pairs}{phase:2d}{molar_mass:13.7f}{dfh:15.3f}"]
    for t_lo, t_hi, *c in intervals:
        exps = "".join(f"{e:5.1f}" for e in exponents)
        out.append(f"{t_lo:11.3f}{t_hi:11.3f}7{exps}  {0.0:15.3f}")
        out.append("".join(_d16(x) for x in c[0:5]))
        out.append(_d16(c[5]) + _d16(c[6]) + " " * 16 + _d16(c[7]) + _d16(c[8]))
    return "\n".join(out)


NASA9_HEADER = "thermo\n    200.000  1000.000  6000.000 20000.000   9/09/04"


def csv_text(header: list[str], rows: list[list]) -> str:
    """A CSV text; cells holding commas are quoted."""
    def cell(v):
        s = "" if v is None else (repr(float(v)) if isinstance(v, float) else str(v))
        return f'"{s}"' if ("," in s or '"' in s) else s
    return "\n".join([",".join(header)] + [",".join(cell(v) for v in r) for r in rows]) + "\n"
