"""Studies and appraisals: every study with its design, level, events and countries; the
appraisal of record of one study (blinding respected); registered events; reviewer agreement."""

import identity
import pandas as pd
import streamlit as st
import ui

import data

db = data.db_target()
viewer = identity.who()

# 1. data ------------------------------------------------------------------------------------
with ui.guard():
    summary = data.summary(db)
    studies = data.studies(db)

st.title("Studies and appraisals")
ui.demo_notice(summary)

tab_studies, tab_events, tab_agreement = st.tabs(
    ["Studies", "Exposure-change events", "Reviewer agreement"]
)

# 2. study list with filters -----------------------------------------------------------------
with tab_studies:
    f1, f2, f3, f4 = st.columns([1, 1, 1, 2])
    exposures = sorted({e for s in studies["exposures"] for e in s.split(", ") if e})
    families = sorted(studies["design_family"].dropna().unique())
    exp_pick = f1.multiselect("Exposure", exposures, key="studies_exposure")
    fam_pick = f2.multiselect("Design family", families, key="studies_family")
    lvl_pick = f3.multiselect(
        "Level of record", ["0", "1", "2", "3", "not appraised"], key="studies_level"
    )
    text = f4.text_input("Search citation, study, country or outcome", key="studies_search")
    shown = studies.assign(level=studies["level"].map(ui.level_text))
    mask = pd.Series(True, index=shown.index)
    if exp_pick:
        mask &= shown["exposures"].map(lambda s: any(e in s.split(", ") for e in exp_pick))
    if fam_pick:
        mask &= shown["design_family"].isin(fam_pick)
    if lvl_pick:
        mask &= shown["level"].isin(lvl_pick)
    if text:
        cols = ["study_id", "citation", "countries", "outcomes", "events"]
        hay = (
            shown[cols[0]]
            .astype(str)
            .str.cat([shown[c].astype(str) for c in cols[1:]], sep=" ", na_rep="")
        )
        mask &= hay.str.lower().str.contains(text.lower(), regex=False)
    shown = shown[mask]
    st.caption(f"{len(shown):,} of {len(studies):,} studies")
    ui.table(
        shown,
        key="studies_table",
        titles={"study_id": "study", "level": "level of record"},
        column_config={
            "level of record": st.column_config.TextColumn(
                help="overall level of the consensus appraisal (0 fatal … 3 strong)"
            ),
            "year": st.column_config.NumberColumn(format="%d"),
            "demo": st.column_config.CheckboxColumn(),
        },
    )

    # 3. one study's appraisals --------------------------------------------------------------
    st.subheader("Appraisal of record")
    if shown.empty:
        st.info("No study matches these filters.")
    else:
        study = ui.pick_capped(
            "Study",
            shown["study_id"].tolist(),
            key="studies_pick",
            noun="matching studies",
            narrow="narrow the filters or the search above",
            help="Type to search the studies listed; the filters and the search above "
            "choose which studies are listed.",
        )
        with ui.guard():
            view = data.appraisals(db, study, viewer)
        st.markdown(
            f"**{view['citation']}** · design `{view['design']}` · "
            f"{view['independent']} independent appraisal(s)"
        )
        record = view["of_record"]
        if view.get("older_rubric"):
            st.warning(view["older_rubric"])
        if record is None:
            st.info(
                "No consensus appraisal yet: this study has no level of record and is "
                "counted as not appraised."
            )
        else:
            st.markdown(
                f"Overall level **{record.overall}**, decided by "
                f"`{record.decided_by}`: {record.reason}. Rubric {record.rubric}."
            )
        table = {}
        for a in view["appraisals"]:
            col = f"{a.reviewer} ({a.stage})"
            table[col] = ["hidden" if a.blinded else ui.level_text(a.overall)] + [
                "hidden" if a.blinded else ui.level_text((a.ratings or {}).get(d))
                for d in view["domains"]
            ]
        if table:
            titles = data.domain_titles(db)
            frame = pd.DataFrame(table, index=["overall", *view["domains"]])
            frame.insert(
                0,
                "title",
                ["overall level (the rubric's summary rule)"]
                + [titles.get(d, d) for d in view["domains"]],
            )
            st.dataframe(
                frame.rename_axis("domain").reset_index(),
                hide_index=True,
                width="stretch",
                key="appraisal_table",
                height=36 * (len(frame) + 1) + 3,
            )
        hidden = [a for a in view["appraisals"] if a.blinded]
        if hidden:
            st.info(
                f"Not shown to you: {', '.join(a.reviewer for a in hidden)} ({hidden[0].reason})."
            )
        if record is not None and record.justifications:
            titles = data.domain_titles(db)
            with st.expander("Reasons recorded with the appraisal of record"):
                for d, why in record.justifications.items():
                    st.markdown(f"- **{titles.get(d, d)}**: {why}")
        st.caption(view["caution"])

# 4. registered events -----------------------------------------------------------------------
with tab_events:
    with ui.guard():
        events = data.events(db)
    st.caption(
        f"{len(events)} registered exposure-change events; "
        f"{int((events['studies'] == 0).sum())} without any study."
    )
    ui.table(
        events.drop(columns=["change_year"]),
        key="events_table",
        titles={"event_id": "event", "change_date": "date of change", "family": "family of change"},
    )

# 5. agreement -------------------------------------------------------------------------------
with tab_agreement:
    with ui.guard():
        agree = data.agreement(db, viewer)
    st.caption(
        "Agreement between the two independent reviewers per rubric domain (only "
        "studies whose independent appraisals are both in, and that you may see)."
    )
    if agree.attrs.get("blinded_note"):
        st.info(agree.attrs["blinded_note"])
    ui.table(agree, key="agreement_table")
