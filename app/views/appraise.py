"""Appraise a study: the rubric form domain by domain (question, the levels' criteria, the
suggested level and its reason, a reason required when a rating departs from it), submitted
as an independent appraisal; once both independent appraisals are in, the two side by side
with disagreements marked, and the consensus form; the agreement table per domain.

Submitting goes through the appraisal import (services/appraisal_form.py): the same rules and
messages as ``exposhift appraise import``. Blinding is the service's."""

import forms
import pandas as pd
import streamlit as st
import ui

import data
from exposhift.errors import ExposhiftError, InputFileError
from exposhift.services import appraisal_form as af
from exposhift.services import appraising

db = data.db_target()
st.title("Appraise a study")
with ui.guard():
    ui.demo_notice(data.summary(db))
    studies = data.studies(db)

person = forms.me()
found = ui.search_options(
    studies["study_id"].tolist(),
    st.text_input("Search studies (key or citation)", key="appraise_search"),
    (studies["study_id"] + " " + studies["citation"].fillna("")).tolist(),
)
if not found:
    st.info("No study matches this search.")
    st.stop()
study = ui.pick_capped("Study", found, key="appraise_study", param="study", noun="matching studies")
with ui.guard():
    form = af.appraisal_form(forms.store(), study, person.name)
st.markdown(
    f"**{form.citation}** · design `{form.design}` · rubric {form.rubric} · "
    f"{form.independent} of 2 independent appraisals in"
    + (" · consensus recorded" if form.consensus else "")
)
st.caption(f"Overall level: {form.summary_rule}.")
LEVEL_CHOICES = [None, 3, 2, 1, 0]


def _level_label(level) -> str:
    if level is None:
        return "not rated"
    return f"{level} ({next(name for lv, name, _ in form.domains[0].levels if lv == level)})"


def _domain_inputs(prefix: str, defaults: dict) -> tuple[dict, dict, dict]:
    """One block per domain; returns ratings, reasons and reporting as entered."""
    errors = st.session_state.get(f"{prefix}_errors", {})
    ratings, reasons, reporting = {}, {}, {}
    rep_keys = [None, *[r.key for r in form.reporting]]
    rep_label = {r.key: r.label for r in form.reporting}
    for d in form.domains:
        with st.container(border=True):
            tag = "core" if d.core else ("reported apart" if d.apart else "can cap the overall")
            st.markdown(f"**{d.title}** · `{d.key}` · {tag}")
            st.markdown(f"_{d.question}_")
            with st.expander("The levels' criteria and what to look for"):
                for lv, name, crit in d.levels:
                    st.markdown(f"**{lv} ({name})**\n" + "\n".join(f"- {c}" for c in crit))
                if d.design is not None and d.design.criteria:
                    st.markdown(
                        f"**For {form.design} designs:**\n"
                        + "\n".join(f"- {c}" for c in d.design.criteria)
                    )
                if d.look_for:
                    st.markdown("**Look for:**\n" + "\n".join(f"- {x}" for x in d.look_for))
            s = d.suggestion
            if s is not None:
                wanted = f"{s.level}" if s.level is not None else f"at most {s.max_level}"
                st.info(f"Suggested from the recorded facts: **{wanted}** — {s.reason}")
            c1, c2 = st.columns([1, 1])
            level = c1.radio(
                "Your rating",
                LEVEL_CHOICES,
                index=LEVEL_CHOICES.index(defaults.get(d.key)),
                format_func=_level_label,
                horizontal=True,
                key=f"{prefix}_{d.key}",
            )
            rep = c2.selectbox(
                "Reporting",
                rep_keys,
                format_func=lambda k: "not stated" if k is None else rep_label[k],
                key=f"{prefix}_{d.key}_reporting",
            )
            required = af.needs_reason(s, level)
            why = st.text_area(
                "Reason for departing from the suggestion (required)"
                if required
                else "Reason (optional)",
                key=f"{prefix}_{d.key}_why",
                height=68,
            )
            if required and not why.strip():
                st.warning("Your rating departs from the suggestion: give the reason.")
            for msg in errors.get(d.key, []):
                st.error(msg)
            ratings[d.key], reasons[d.key], reporting[d.key] = level, why, rep
    return ratings, reasons, reporting


def _submit(prefix: str, stage: str, ratings, reasons, reporting) -> None:
    try:
        done = af.submit_appraisal(
            forms.store(),
            study,
            ratings,
            reasons,
            reporting,
            reviewer=person.name,
            stage=stage,
        )
    except InputFileError as exc:
        by_domain: dict[str, list[str]] = {}
        for p in exc.problems:
            by_domain.setdefault(p.column or "", []).append(p.message)
        st.session_state[f"{prefix}_errors"] = by_domain
        st.session_state[f"{prefix}_problems"] = exc
        st.rerun()
    except ExposhiftError as exc:
        st.error(str(exc))
        return
    forms.after_write()
    st.session_state.pop(f"{prefix}_errors", None)
    st.session_state.pop(f"{prefix}_problems", None)
    st.session_state["appraise_message"] = (
        f"**{stage.capitalize()} appraisal of {study} recorded** as {person.name} "
        f"(rubric {done.rubric})."
        if done.added
        else f"This {stage} appraisal was already recorded as it is; nothing changed."
    )
    st.rerun()


msg = st.session_state.pop("appraise_message", None)
if msg:
    st.success(msg)

tab_mine, tab_compare, tab_agree = st.tabs(
    ["Independent appraisal", "Comparison and consensus", "Reviewer agreement"]
)

# 1. the reviewer's own independent appraisal --------------------------------------------------
with tab_mine:
    own = form.own(person.name)
    if own is not None:
        st.success(
            f"Your independent appraisal is in: overall level {ui.level_text(own.overall)} "
            f"(decided by `{own.decided_by}`)."
        )
        ui.table(
            pd.DataFrame(
                [
                    {"domain": d.title, "your rating": (own.ratings or {}).get(d.key)}
                    for d in form.domains
                ]
            ),
            key="appraise_own",
        )
    elif form.unblinded:
        st.info("Both independent appraisals of this study are in; see the comparison.")
    elif forms.who_line("reviewer", "appraise a study") and person.name:
        st.caption(
            "Your ratings stay hidden from the other reviewer until both independent "
            "appraisals are in, and theirs from you."
        )
        if st.session_state.get("indep_problems"):
            forms.problems(st.session_state["indep_problems"], key="indep_problem_table")
        entered = _domain_inputs("indep", {})
        if st.button("Submit my independent appraisal", type="primary", key="indep_submit"):
            _submit("indep", "independent", *entered)

# 2. comparison and consensus ----------------------------------------------------------------
with tab_compare:
    table = af.comparison(form)
    if table is None:
        st.info(
            f"The comparison appears once both independent appraisals are in "
            f"({form.independent} of 2 so far)."
        )
    else:
        n_diff = int(table["differs"].sum())
        st.markdown(f"**{n_diff} of {len(table)} rows differ** (marked).")
        reviewers = [c for c in table.columns if c not in ("domain", "key", "differs", "suggested")]
        shown = table.assign(
            **{
                c: table[c].map(lambda v: "not rated" if pd.isna(v) else str(int(v)))
                for c in reviewers
            }
        )
        st.dataframe(
            shown.style.apply(
                lambda r: ["background-color: #fde2c8" if r["differs"] else "" for _ in r],
                axis=1,
            ),
            hide_index=True,
            width="stretch",
            height=36 * (len(shown) + 1) + 3,
            key="appraise_compare",
        )
        if form.consensus is not None:
            st.success(
                f"Consensus recorded by {form.consensus.reviewer}: overall level "
                f"{ui.level_text(form.consensus.overall)} — the study's level of record."
            )
        elif forms.who_line("reviewer", "record the consensus") and person.name:
            st.markdown("**Consensus appraisal** (prefilled where the two reviewers agree)")
            if st.session_state.get("cons_problems"):
                forms.problems(st.session_state["cons_problems"], key="cons_problem_table")
            agreed = {}
            for _, r in table.iterrows():
                vals = {r[c] for c in reviewers}
                if len(vals) == 1 and r["key"] != "overall":
                    v = next(iter(vals))
                    agreed[r["key"]] = None if pd.isna(v) else int(v)
            entered = _domain_inputs("cons", agreed)
            if st.button("Record the consensus", type="primary", key="cons_submit"):
                _submit("cons", "consensus", *entered)

# 3. agreement ----------------------------------------------------------------------------------
with tab_agree:
    with ui.guard():
        agree = appraising.agreement(forms.store())
    st.caption(
        "Percent agreement and weighted kappa between the two independent reviewers per "
        "domain, over the studies whose two independent appraisals are in. 'all domains' "
        "counts study × domain pairs; the 'overall level' row counts studies (n = studies)."
    )
    ui.table(agree, key="appraise_agreement")
    st.caption(form.caution)
ui.caution()
