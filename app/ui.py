"""Display pieces every page shares: the caution, the demo notice, errors, status boxes."""

from __future__ import annotations

import contextlib
from collections.abc import Iterator

import pandas as pd
import streamlit as st

from exposhift.errors import ExposhiftError
from exposhift.replication.status import status_label
from exposhift.services.browse import DEMO_NOTE
from exposhift.synthesis.pooling import CAUTION  # the library's caution, as the CLI prints it

STATUS_TONE = {
    "convergent": "success",
    "replicated-place": "success",
    "replicated-time": "success",
    "discordant": "error",
    "replicated-against": "error",
    "not-replicated": "warning",
    "single-event": "warning",
    "weak-only": "warning",
    "none": "info",
}


@contextlib.contextmanager
def guard() -> Iterator[None]:
    """Show a user error as one ``st.error`` line and stop the page (no traceback)."""
    try:
        yield
    except ExposhiftError as exc:
        st.error(str(exc))
        st.stop()


def caution(extra: str | None = None) -> None:
    """The standing caution; ``extra`` is the service's own wording, shown beneath it."""
    text = f"**Caution.** {CAUTION}"
    if extra and extra.strip() and extra.strip() != CAUTION:
        text += f"\n\n{extra}"
    st.warning(text)


def demo_notice(summary) -> None:
    """Say plainly when the evidence base holds invented demo records."""
    if summary.all_demo:
        st.info(f"**Invented demo data.** {DEMO_NOTE}")
    elif summary.any_demo:
        st.info(
            f"**Partly invented demo data:** {summary.demo_studies} studies and "
            f"{summary.demo_events} events are demo records. {DEMO_NOTE}"
        )


def status_box(status: str, rule: str, provisional: bool = False, imprecise: bool = False) -> None:
    """The replication status in a coloured box (its tone from the status), with the rule that
    produced it in words; a provisional or imprecise status says so in its title, and an
    imprecise one is never shown in the colour of success."""
    tone = STATUS_TONE.get(status, "info")
    if imprecise and tone == "success":
        tone = "warning"
    label = status_label(status, provisional, imprecise)
    getattr(st, tone)(f"**Replication status: {label}**\n\n{rule}")


def region_name(key: str) -> str:
    """A region of the replication settings as every page writes it: ``western-europe`` ->
    ``Western Europe``."""
    return str(key).replace("-", " ").replace("_", " ").title()


def level_text(value) -> str:
    return "not appraised" if value is None or pd.isna(value) else f"{int(value)}"


def pick(
    label: str,
    options: list[str],
    key: str,
    default: str | None = None,
    help: str | None = None,
    param: str | None = None,
) -> str:
    """A selectbox that keeps a valid choice when its options change. ``param``: a URL query
    parameter that gives the first choice (``?exposure=...&outcome=...`` links to a view)."""
    if not options:
        st.stop()
    if key in st.session_state and st.session_state[key] not in options:
        del st.session_state[key]
    wanted = st.query_params.get(param) if param else None
    if wanted in options and key not in st.session_state:
        default = wanted
    index = options.index(default) if default in options else 0
    return st.selectbox(label, options, index=index, key=key, help=help)


#: choices a picker lists at most (a selectbox of thousands of studies is sent to the browser
#: whole and cannot be read; the rest are reached by narrowing the search)
PICK_LIMIT = 200


def pick_capped(
    label: str,
    options: list[str],
    key: str,
    *,
    limit: int | None = None,
    noun: str = "choices",
    narrow: str = "narrow the search",
    help: str | None = None,
    param: str | None = None,
    first: tuple[str, ...] = (),
) -> str:
    """:func:`pick` over the first ``limit`` (default :data:`PICK_LIMIT`) of ``options``; when
    there are more, a caption says how many are not listed and how to reach them. A choice
    asked for in the address (``param``) and the choice already made (the widget's value) are
    kept listed even beyond the limit. ``first``: choices listed ahead of ``options`` and not
    counted among them (such as "a new study")."""
    limit = PICK_LIMIT if limit is None else limit
    listed = list(options[:limit])
    wanted = st.query_params.get(param) if param else None
    current = st.session_state.get(key)
    for keep in (wanted, current):
        if keep is not None and keep not in listed and keep in options:
            listed.append(keep)
    more = len(options) - len(listed)
    chosen = pick(label, [*first, *listed], key=key, help=help, param=param)
    if more > 0:
        st.caption(
            f"The first {len(listed):,} of {len(options):,} {noun} are listed: "
            f"{more:,} more, {narrow}."
        )
    return chosen


def search_options(options: list[str], text: str, haystack: list[str] | None = None) -> list[str]:
    """The options whose text (``haystack``, default the options themselves) contains
    ``text``, case-insensitively, in their order (all of them for an empty search)."""
    needle = text.strip().lower()
    if not needle:
        return list(options)
    hay = options if haystack is None else haystack
    return [o for o, h in zip(options, hay, strict=True) if needle in str(h).lower()]


def study_search(studies: pd.DataFrame, key: str) -> list[str]:
    """A search box over the study list's keys and citations; the matching study keys, in
    the list's order (every study for an empty search)."""
    text = st.text_input("Search studies (key or citation)", key=key)
    return search_options(
        studies["study_id"].tolist(),
        text,
        (studies["study_id"] + " " + studies["citation"].fillna("")).tolist(),
    )


# ----------------------------------------------------------------------------- tables
#: rows shown per page of a table (a table of 100,000 rows is sent one page at a time)
PAGE_ROWS = 50
#: what an empty cell shows (a missing number or text: nothing, never "None" or "nan")
EMPTY = ""


def title_of(column: str) -> str:
    """A column title for people: ``design_family`` -> ``design family``."""
    return str(column).replace("_", " ")


def readable(frame: pd.DataFrame, titles: dict[str, str] | None = None) -> pd.DataFrame:
    """``frame`` with human column titles (``titles``, else :func:`title_of`) and empty cells
    where a text column holds None or NaN (numbers keep NaN: Streamlit shows it blank)."""
    out = frame.copy()
    for c in out.columns:
        if not (pd.api.types.is_numeric_dtype(out[c]) or pd.api.types.is_bool_dtype(out[c])):
            out[c] = out[c].astype(object).where(out[c].notna(), "")
    names = titles or {}
    return out.rename(columns={c: names.get(c, title_of(c)) for c in out.columns})


def paged(frame: pd.DataFrame, key: str, per_page: int = PAGE_ROWS) -> pd.DataFrame:
    """The rows of the page chosen under the table (all rows when they fit on one page)."""
    n = len(frame)
    if n <= per_page:
        return frame
    pages = (n + per_page - 1) // per_page
    left, right = st.columns([1, 4])
    page = left.number_input(
        "Page", min_value=1, max_value=pages, value=1, step=1, key=f"{key}_page"
    )
    first = (int(page) - 1) * per_page
    right.caption(f"rows {first + 1}–{min(first + per_page, n)} of {n:,} ({pages:,} pages)")
    return frame.iloc[first : first + per_page]


def table(
    frame: pd.DataFrame,
    key: str,
    titles: dict[str, str] | None = None,
    column_config: dict | None = None,
    per_page: int = PAGE_ROWS,
    **kwargs,
) -> pd.DataFrame:
    """Show ``frame`` one page at a time with human titles and empty cells; returns the rows
    shown. ``column_config`` is keyed by the *shown* titles. A missing value is drawn as an
    empty cell (``EMPTY``; Streamlit would write "None")."""
    shown = readable(paged(frame, key, per_page), titles)
    kwargs.setdefault("placeholder", EMPTY)
    st.dataframe(
        shown,
        hide_index=True,
        width="stretch",
        key=key,
        column_config=column_config or {},
        **kwargs,
    )
    return shown
