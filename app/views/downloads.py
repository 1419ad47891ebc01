"""Downloads: the evidence base's archive, the extraction sheet (optionally of one exposure) and
the dossier of one exposure (HTML or Word), each made by the same service as the command."""

import forms
import streamlit as st
import ui

import data
from exposhift.services import downloads

db = data.db_target()
st.title("Downloads")
with ui.guard():
    summary = data.summary(db)
    ui.demo_notice(summary)
    studies = data.studies(db)
exposures = sorted({e for s in studies["exposures"] for e in s.split(", ") if e})
person = forms.me()


def _offer(key: str, made: downloads.Download) -> None:
    for w in made.warnings:
        st.warning(w)
    if made.counts:
        st.caption(", ".join(f"{n} {k}" for k, n in made.counts.items()))
    if made.fingerprint:
        st.caption(f"Fingerprint {made.fingerprint}")
    st.download_button(
        f"Download {made.name}", made.data, file_name=made.name, mime=made.mime, key=key
    )


# 1. archive -----------------------------------------------------------------------------------
st.subheader("Archive of the whole evidence base")
st.caption(
    "The lossless JSON archive (`exposhift export archive.json`): every record and every "
    "appraisal; `exposhift import` reads it back."
)
if person.may("admin"):
    if st.button("Prepare the archive", key="dl_archive_make"):
        with ui.guard():
            st.session_state["dl_archive"] = downloads.archive_download(forms.store())
    if "dl_archive" in st.session_state:
        _offer("dl_archive_get", st.session_state["dl_archive"])
else:
    st.info(
        "The archive holds every reviewer's independent ratings, also those still blinded: "
        "it is an administrator's export."
    )

# 2. sheet -------------------------------------------------------------------------------------
st.subheader("Extraction sheet")
c1, c2 = st.columns(2)
which = c1.selectbox("Exposure", ["(all exposures)", *exposures], key="dl_sheet_exposure")
fmt = c2.radio("Format", downloads.SHEET_FORMATS, horizontal=True, key="dl_sheet_format")
if st.button("Prepare the sheet", key="dl_sheet_make"):
    with ui.guard():
        st.session_state["dl_sheet"] = downloads.sheet_download(
            forms.store(), fmt, None if which.startswith("(") else which
        )
if "dl_sheet" in st.session_state:
    _offer("dl_sheet_get", st.session_state["dl_sheet"])

# 3. dossier -----------------------------------------------------------------------------------
st.subheader("Dossier of one exposure")
if exposures:
    d1, d2 = st.columns(2)
    exp = d1.selectbox("Exposure", exposures, key="dl_dossier_exposure")
    dfmt = d2.radio(
        "Format",
        downloads.DOSSIER_FORMATS,
        format_func={"html": "HTML", "docx": "Word"}.get,
        horizontal=True,
        key="dl_dossier_format",
    )
    st.caption("Made as `exposhift dossier` makes it; this takes some seconds (Word longer).")
    if st.button("Prepare the dossier", key="dl_dossier_make"):
        with st.spinner("Making the dossier…"), ui.guard():
            st.session_state["dl_dossier"] = downloads.dossier_download(forms.store(), exp, dfmt)
    if "dl_dossier" in st.session_state:
        _offer("dl_dossier_get", st.session_state["dl_dossier"])
ui.caution()
