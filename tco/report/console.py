"""A short summary printed on the terminal after ``tco run``."""
from __future__ import annotations

import sys


def print_summary(result) -> None:
    """Print the key figures of a Result (plain text; rich is used for colour if a tty)."""
    from tco.report import formatting as fm

    s = result.scenario
    cur = s.study.currency
    system = s.study.units
    lines = [f"{s.study.name}"]
    for m in result.cashflow.trucks:
        # levelized cost per metre → per km, shown per mile in US units
        per = fm.unit_price(m.levelized_cost * 1000.0, "km", cur, system, 3)
        lines.append(f"  {m.name:<28} PV of costs {fm.money(m.present_value, cur):>18}   "
                     f"{per}")
    for c in result.cashflow.comparisons:
        word = "more" if c.present_value_difference > 0 else "less"
        diff = fm.money(abs(c.present_value_difference), cur)
        lines.append(f"  {c.truck} costs {diff} {word} "
                     f"than {c.baseline} over {result.cashflow.analysis_years} years "
                     "(present value)")
    for w in result.warnings:
        lines.append(f"  warning: {w}")
    print("\n".join(lines), file=sys.stdout)
