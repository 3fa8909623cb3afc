"""How a p-value is printed, in the terminal and in the appendix alike.

Plain Python, no plotting library: the command line imports it to print its
tables, the appendix to write its text and tables, so the same p looks the same
in both places.
"""

from __future__ import annotations

import math

#: p-values below this are printed as ``< 0.001``.
P_FLOOR = 0.001


def fmt_p(p) -> str:
    """A p-value: three significant digits, ``< 0.001`` below 0.001, ``""`` when missing.

    Monte Carlo p-values are never 0 (they are ``(1 + count) / (1 + B)``), so a
    small one is shown as below the floor rather than as a number that its
    replicates cannot resolve.

    Examples
    --------
    >>> fmt_p(0.0123456), fmt_p(2e-9), fmt_p(0.4), fmt_p(1 / 1001), fmt_p(0.001)
    ('0.0123', '< 0.001', '0.4', '< 0.001', '0.001')
    >>> fmt_p(None), fmt_p(float("nan"))
    ('', '')
    """
    if p is None:
        return ""
    p = float(p)
    if not math.isfinite(p):
        return ""
    return f"< {P_FLOOR:g}" if p < P_FLOOR else f"{p:.3g}"
