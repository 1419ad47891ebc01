"""Figures as PNG images, rendered offline: plotly + kaleido (1.x) driving the system Chromium.

Kaleido 1.x renders with a local Chromium (found on PATH, e.g. Debian's ``/usr/bin/chromium``,
or named by ``EXPOSHIFT_CHROMIUM``) and the plotly.js that ships with the plotly package; MathJax
is switched off so nothing is fetched. One browser is started for all figures of a dossier.

A figure that cannot be rendered (no Chromium, a renderer error) gives ``None`` and one warning;
the Word file then shows a line in place of the figure.
"""

from __future__ import annotations

import os
import shutil
from dataclasses import dataclass, field

import plotly.graph_objects as go

CHROMIUM_ENV = "EXPOSHIFT_CHROMIUM"
CHROMIUM_NAMES = ("chromium", "chromium-browser", "google-chrome", "chrome")
SCALE = 2  # pixel density of the PNG (the Word file shows it at the page width)


@dataclass
class Rendered:
    images: dict[str, bytes | None] = field(default_factory=dict)
    warnings: list[str] = field(default_factory=list)


def find_chromium() -> str | None:
    """The Chromium to render with: ``EXPOSHIFT_CHROMIUM`` if set (an empty value or a missing
    file means none), else the first Chromium on PATH."""
    if CHROMIUM_ENV in os.environ:
        path = os.environ[CHROMIUM_ENV]
        return path if path and os.access(path, os.X_OK) else None
    for name in CHROMIUM_NAMES:
        found = shutil.which(name)
        if found:
            return found
    return None


def render_png(figures: dict[str, go.Figure]) -> Rendered:
    """Render every figure to PNG bytes (``None`` for one that could not be rendered)."""
    out = Rendered()
    if not figures:
        return out
    browser = find_chromium()
    if browser is None:
        out.warnings.append(
            f"figures not rendered for Word: no Chromium found (install chromium or set "
            f"{CHROMIUM_ENV}); the Word file has a line in place of each figure"
        )
        out.images = dict.fromkeys(figures)
        return out
    try:
        import kaleido
    except ImportError:
        out.warnings.append(
            "figures not rendered for Word: the kaleido package is missing (pip install kaleido)"
        )
        out.images = dict.fromkeys(figures)
        return out
    previous = os.environ.get("BROWSER_PATH")
    os.environ["BROWSER_PATH"] = browser
    started = False
    try:
        kaleido.start_sync_server(mathjax=False, silence_warnings=True)
        started = True
        for name, fig in figures.items():
            layout = fig.layout
            opts = {
                "format": "png",
                "width": layout.width or 900,
                "height": layout.height or 500,
                "scale": SCALE,
            }
            try:
                out.images[name] = kaleido.calc_fig_sync(fig, opts=opts)
            except Exception as exc:  # noqa: BLE001 - any renderer failure becomes a warning
                out.images[name] = None
                out.warnings.append(
                    f"figure '{name}' not rendered: {type(exc).__name__}: {str(exc)[:200]}"
                )
    except Exception as exc:  # noqa: BLE001 - the browser could not be started
        out.warnings.append(
            f"figures not rendered for Word: Chromium at {browser} could not "
            f"be started ({type(exc).__name__}: {str(exc)[:200]})"
        )
        for name in figures:
            out.images.setdefault(name, None)
    finally:
        if started:
            try:
                kaleido.stop_sync_server(silence_warnings=True)
            except Exception:  # noqa: BLE001, S110 - stopping a dead browser is no error
                pass
        if previous is None:
            os.environ.pop("BROWSER_PATH", None)
        else:
            os.environ["BROWSER_PATH"] = previous
    return out
