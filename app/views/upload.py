"""Upload a sheet: a preview of what it would add, change and leave alone (every problem listed
with its row and column), then the import on confirmation. The same service as ``exposhift
import FILE --dry-run`` and ``exposhift import FILE``."""

import hashlib

import forms
import streamlit as st
import ui

import data
from exposhift.errors import ExposhiftError, InputFileError
from exposhift.services import uploads

db = data.db_target()
st.title("Upload a sheet")
with ui.guard():
    ui.demo_notice(data.summary(db))
st.caption(
    "Records are matched by their keys: a new key is added, a changed record is updated (its "
    "earlier values stay in the audit trail), nothing is deleted. Nothing is written until you "
    "confirm, and then all or nothing."
)
if not forms.who_line("editor", "upload a sheet"):
    st.stop()

kind = st.radio(
    "The file is",
    list(uploads.KINDS),
    format_func=uploads.KINDS.get,
    horizontal=True,
    key="upload_kind",
    help="An extraction sheet has one row per estimate (docs/extraction-sheet.md); an events "
    "sheet registers exposure changes that no study has evaluated yet.",
)
limit = min(uploads.upload_limit_mb(), int(st.get_option("server.maxUploadSize")))
upload = st.file_uploader(
    f"Sheet file (.csv or .xlsx, at most {limit} MB)",
    type=["csv", "xlsx"],
    key="upload_file",
)
if upload is None:
    st.info("Choose a file to see what it would change.")
    st.stop()

content = upload.getvalue()
digest = hashlib.sha256(content).hexdigest()
ident = (upload.name, digest, kind)
if st.session_state.get("upload_done") == ident:
    report = st.session_state["upload_report"]
    st.success(
        f"**Imported {upload.name}** as {forms.me().name}: "
        + ", ".join(
            f"{c.added} added and {c.updated} changed {k}"
            for k, c in report.counts.items()
            if c.added or c.updated
        )
        + "."
        if report.changed
        else f"**{upload.name}** changed nothing: every record was already there as it is."
    )
    st.dataframe(uploads.count_table(report), hide_index=True, key="upload_done_counts")
    st.stop()

# 1. preview (dry run) -----------------------------------------------------------------------
st.subheader("Preview: nothing written yet")
try:
    with st.spinner("Checking the file…"):
        preview = uploads.preview_upload(forms.store(), upload.name, content, kind)
except InputFileError as exc:
    forms.problems(exc, key="upload_problems")
    st.caption("Correct the file and upload it again; every problem is listed at once.")
    st.stop()
except ExposhiftError as exc:
    st.error(str(exc))
    st.stop()

report = preview.report
st.dataframe(uploads.count_table(report), hide_index=True, key="upload_counts")
for note in report.notes:
    st.caption(f"Note: {note}")
if preview.warnings:
    st.warning(
        "**Values that are valid but look wrong** (the import goes on; check them):\n\n"
        + "\n".join(f"- {w}" for w in preview.warnings)
    )
if len(preview.records):
    changed = preview.records[preview.records["status"] == "changed"]
    st.markdown(
        f"**Records that would change:** {len(changed)} changed"
        + ("" if preview.listed_all else f" (first {uploads.LISTED} listed)")
    )
    st.dataframe(preview.records, hide_index=True, width="stretch", key="upload_records")

# 2. confirm ---------------------------------------------------------------------------------
if not report.changed:
    st.info("Importing this file would change nothing: every record is already there as it is.")
    st.stop()
if st.button("Import these records", type="primary", key="upload_confirm"):
    try:
        with st.spinner("Importing…"):
            done = uploads.import_upload(
                forms.store(), upload.name, content, kind, user=forms.me().name
            )
    except InputFileError as exc:
        forms.problems(exc, key="upload_confirm_problems")
        st.stop()
    except ExposhiftError as exc:
        st.error(str(exc))
        st.stop()
    forms.after_write()
    st.session_state["upload_done"] = ident
    st.session_state["upload_report"] = done
    st.rerun()
