"""One mistake, one problem: the rows of a study or event that disagree with its first row are
reported together, under the first row that differs, with the differing fields listed below it.

A study id reused for another study used to give one problem per field and row (18 lines for
one slip); :func:`report_inconsistent` turns that into one problem naming the rows and fields.
"""

from __future__ import annotations

from collections import defaultdict

import numpy as np

from exposhift.io.problems import ProblemLog, quote

#: differing fields listed under a grouped problem before "... and N more"
SHOW_FIELDS = 8


def report_inconsistent(
    log: ProblemLog,
    what: str,
    key_col: str,
    keys: np.ndarray,
    first: np.ndarray,
    diffs: dict[str, tuple[np.ndarray, dict[int, str]]],
) -> int:
    """Report every repeated ``what`` (study, event) whose rows disagree, as one problem per key.

    ``diffs`` maps a field to (mask of differing rows, per-row text "X here but Y"). ``first``
    holds, per row, the frame position of the key's first row. Returns the problems added.
    """
    by_key: dict[object, dict[int, list[tuple[str, str]]]] = defaultdict(dict)
    for f, (mask, texts) in diffs.items():
        for i in np.flatnonzero(mask):
            by_key[keys[i]].setdefault(int(i), []).append((f, texts[int(i)]))
    article = "an" if what[0] in "aeiou" else "a"
    added = 0
    for key, rows in by_key.items():
        positions = sorted(rows)
        head = positions[0]
        ref_row = int(log.rows[first[head]])
        fields = list(dict.fromkeys(f for p in positions for f, _ in rows[p]))
        shown_rows = ", ".join(str(int(log.rows[p])) for p in positions)
        plural = "s" if len(positions) > 1 else ""
        lines = [
            f"{what} {quote(key)} in row{plural} {shown_rows} differs from its first row "
            f"({ref_row}) in {', '.join(fields)}; every row of {article} {what} must give "
            f"the same {what} fields. If this is another {what}, give it its own "
            f"{key_col}; otherwise copy the values of row {ref_row}:"
        ]
        details = [f"row {int(log.rows[p])}, {f}: {text}" for p in positions for f, text in rows[p]]
        lines += [f"      {d}" for d in details[:SHOW_FIELDS]]
        if len(details) > SHOW_FIELDS:
            lines.append(f"      ... and {len(details) - SHOW_FIELDS} more")
        column = fields[0] if len(fields) == 1 else None
        log.add(int(log.rows[head]), column, "\n".join(lines))
        added += 1
    return added
