"""Display pieces every page shares: the caution, the demo notice, errors, status boxes."""

from __future__ import annotations

import contextlib
from collections.abc import Iterator

import pandas as pd
import streamlit as st

from exposhift.errors import ExposhiftError
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


def status_box(status: str, rule: str, provisional: bool = False) -> None:
    """The replication status in a coloured box (its tone from the status), with the rule that
    produced it in words; a provisional status says so in its title."""
    tone = STATUS_TONE.get(status, "info")
    label = status + (" (provisional)" if provisional else "")
    getattr(st, tone)(f"**Replication status: {label}**\n\n{rule}")


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
