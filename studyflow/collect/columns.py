"""Column names of the tidy tables (DEVELOPERS.md, "Tidy tables"), in one place.

No imports: the study loader's quantity check reads ``RESERVED`` and must not pay for pandas.
"""

from __future__ import annotations

CASE_COLUMNS = ("study", "case", "point", "level")
RESULT_TAIL = ("cells", "h", "quantity", "kind", "coord", "value", "unit", "status", "converged", "reason")
HISTORY_COLUMNS = ("study", "case", "point", "level", "quantity", "iteration", "value")
CASES_TAIL = ("cells", "h", "status", "reason", "wall_time", "iterations", "converged")
# Read back as text whatever a CSV holds (a case id "1e4" is not a number).
TEXT_COLUMNS = ("study", "case", "point", "quantity", "kind", "unit", "status", "reason")
# Names a parameter or a quantity may not take: they would collide with a column.
RESERVED = tuple(dict.fromkeys((*CASE_COLUMNS, *RESULT_TAIL, *HISTORY_COLUMNS)))
