"""A short summary printed on the terminal after ``tco run``."""
from __future__ import annotations

import sys


def print_summary(result) -> None:
    """Print the key figures of a Result (plain text; rich is used for colour if a tty)."""
    s = result.scenario
    cur = s.study.currency
    us = s.study.units == "us"
    lines = [f"{s.study.name}"]
    for m in result.cashflow.trucks:
        per = m.levelized_cost * (1609.344 if us else 1000)
        lines.append(f"  {m.name:<28} PV of costs {m.present_value:>14,.0f} {cur}   "
                     f"{per:,.3f} {cur}/{'mi' if us else 'km'}")
    for c in result.cashflow.comparisons:
        word = "more" if c.present_value_difference > 0 else "less"
        lines.append(f"  {c.truck} costs {abs(c.present_value_difference):,.0f} {cur} {word} "
                     f"than {c.baseline} over {result.cashflow.analysis_years} years "
                     "(present value)")
    for w in result.warnings:
        lines.append(f"  warning: {w}")
    print("\n".join(lines), file=sys.stdout)
