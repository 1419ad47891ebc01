"""Import warnings for SEs on the wrong scale, and p values entered as bounds ("<0.001").

Outside references: the log-scale reading of an SE (Cochrane Handbook ch. 6, SEs of ratio
measures are on the log scale) and the delta method SE(log(1 + p/100)) = SE_p/(100 + p),
written out here; the thresholds are common practice (docs/extraction-sheet.md).
"""

from __future__ import annotations

import pytest
from io_helpers import row

from exposhift.errors import InputFileError
from exposhift.services.importing import import_into, read_input
from exposhift.store.queries import analysis_frame
from exposhift.synthesis.harmonise import harmonise


def test_plain_rows_give_no_warning(sheet):
    _, frames = read_input(sheet([row(), row(outcome="cough", ci_low="", ci_high="", se="0.1")]))
    assert frames.warnings == []


def test_implausible_ses_are_warnings_with_file_row_and_column(sheet):
    path = sheet(
        [
            row(),
            row(outcome="o2", ci_low="", ci_high="", se="2.0"),  # SE of the RR itself?
            row(
                outcome="o3", measure="pct_change", estimate="10", ci_low="", ci_high="", se="5"
            ),  # percent points
            row(outcome="o4", se="0.5"),  # CI 0.7-0.9 implies SE 0.064 on the log scale
        ]
    )
    _, frames = read_input(path)  # imported: warnings, not errors
    w = frames.warnings
    assert [(p.row, p.column) for p in w] == [(3, "se"), (4, "se"), (5, "se")]
    assert all(p.file == path.name for p in w)
    assert "log(RR)" in w[0].message
    # delta method: 5/(100 + 10) = 0.04545...
    assert "percent points" in w[1].message and "0.0455" in w[1].message
    assert "disagrees with the confidence interval" in w[2].message
    assert str(w[0]).startswith(f"{path.name}, row 3, column 'se': ")


@pytest.mark.parametrize("cell", ["<0.001", "< 0.001", "p<0.001", "P < 0.001", "<=0.001", "≤0.001"])
def test_p_bound_written_in_the_cell(sheet, cell):
    _, frames = read_input(sheet([row(ci_low="", ci_high="", p_value=cell)]))
    est = frames.estimates.iloc[0]
    assert est["p_value"] == 0.001 and bool(est["p_bound"])


def test_exact_p_is_no_bound_and_bound_without_p_is_a_problem(sheet):
    _, frames = read_input(sheet([row(ci_low="", ci_high="", p_value="0.001")]))
    assert not frames.estimates["p_bound"].iloc[0]
    with pytest.raises(InputFileError) as info:
        read_input(sheet([row(p_bound="yes")], name="b.csv"))
    assert any(p.column == "p_bound" for p in info.value.problems)
    with pytest.raises(InputFileError):
        read_input(sheet([row(ci_low="", ci_high="", p_value="<x")], name="c.csv"))


def test_p_bound_is_stored_and_reaches_the_pool(sqlite_store, sheet):
    import_into(
        sqlite_store,
        sheet(
            [
                row(ci_low="", ci_high="", p_value="<0.01"),
                row(outcome="o2", ci_low="", ci_high="", p_value="0.02"),
            ]
        ),
    )
    with sqlite_store.read() as conn:
        frame = analysis_frame(conn)
    assert frame.set_index("outcome")["p_bound"].to_dict() == {"wheeze": True, "o2": False}
    out = harmonise(frame, align_to="decrease").set_index("outcome")
    assert out.loc["wheeze", "provenance"] == "se_from_p;p_bound"
    assert out.loc["o2", "provenance"] == "se_from_p"
