"""The human labels of the extraction sheet's columns (io/column_labels.py): one label per
column, no two alike, help that names the sheet column, stored fields labelled like the sheet
column they come from (io/validate.py's RENAME, read here as the outside route)."""

from __future__ import annotations

from exposhift.io import column_labels
from exposhift.io.columns import COLUMN_NAMES
from exposhift.io.validate import RENAME


def test_every_column_has_one_distinct_label():
    labels = [column_labels.label(c) for c in COLUMN_NAMES]
    assert len(set(labels)) == len(COLUMN_NAMES)
    assert all("_" not in label for label in labels)


def test_help_names_the_sheet_column_and_says_when_it_is_required():
    assert column_labels.help_text("ci_low").endswith("Sheet column: `ci_low`.")
    assert "Required." in column_labels.help_text("estimate")
    assert "Required." not in column_labels.help_text("ci_low")
    assert column_labels.label_with_column("ci_low") == "Lower CI limit (ci_low)"
    assert column_labels.label_with_column(None) == ""


def test_stored_fields_take_the_label_of_their_sheet_column():
    for entity, renames in RENAME.items():
        for column, stored in renames.items():
            assert column_labels.field_label(entity, stored) == column_labels.label(column)
    assert column_labels.field_label("estimate", "point") == "Estimate"
    assert column_labels.field_label("rating", "suggested_level") == "suggested level"
