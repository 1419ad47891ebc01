"""Time to build a dossier against the time of the commands that compute its numbers.

Two evidence bases (SQLite): the invented demo (its busiest exposure, most estimates) and an
invented synthetic base (exposhift.io.synthetic) whose one exposure has --estimates estimates.
For each exposure, best of --repeat runs:

- baseline: ``exposhift pool --details`` plus ``exposhift replication`` for every outcome of
  the exposure, as the services behind those commands (pool_evidence(details=True) +
  replication_for);
- HTML alone: ``exposhift dossier --format html``;
- HTML + Word: ``--format html,docx`` (figures rendered offline by kaleido + Chromium);
- the figure share: building the plotly figures, and rendering them to PNG for Word.

Usage: python benchmarks/bench_dossier.py [--estimates 2000] [--repeat 2]
Target (issue 12): HTML under 3x the baseline.
"""

from __future__ import annotations

import argparse
import tempfile
import time
from pathlib import Path


class Timer:
    """Wraps a function and adds up the seconds spent in it."""

    def __init__(self, module, name: str):
        self.module, self.name, self.seconds = module, name, 0.0
        self.original = getattr(module, name)

        def wrapped(*args, **kwargs):
            t = time.perf_counter()
            try:
                return self.original(*args, **kwargs)
            finally:
                self.seconds += time.perf_counter() - t

        setattr(module, name, wrapped)

    def restore(self) -> None:
        setattr(self.module, self.name, self.original)


def best(fn, repeat: int) -> float:
    times = []
    for _ in range(repeat):
        t = time.perf_counter()
        fn()
        times.append(time.perf_counter() - t)
    return min(times)


def measure(store, exposure: str, work: Path, repeat: int) -> dict:
    from exposhift.dossier import figures, images
    from exposhift.services.dossier import build_dossier
    from exposhift.services.pooling import pool_evidence
    from exposhift.services.replicating import replication_for
    from exposhift.store.dossier_records import outcomes_of_exposure

    with store.read() as conn:
        outcomes = outcomes_of_exposure(conn, exposure)

    def baseline():
        for o in outcomes:
            pool_evidence(store, exposure, o, details=True)
            replication_for(store, exposure, o)

    base = best(baseline, repeat)
    html = best(
        lambda: build_dossier(store, exposure, out=work / "h", formats="html", force=True), repeat
    )
    fig_t, png_t = Timer(figures, "dossier_figures"), Timer(images, "render_png")
    try:
        both = best(
            lambda: build_dossier(store, exposure, out=work / "w", formats="html,docx", force=True),
            repeat,
        )
    finally:
        fig_t.restore()
        png_t.restore()
    return {
        "exposure": exposure,
        "outcomes": len(outcomes),
        "baseline": base,
        "html": html,
        "html_docx": both,
        "figures": fig_t.seconds / repeat,
        "png": png_t.seconds / repeat,
    }


def report(name: str, r: dict) -> None:
    print(f"\n{name}: {r['exposure']} ({r['outcomes']} outcomes)")
    print(f"  baseline pool --details + replication   {r['baseline']:8.2f} s   1.00x")
    print(
        f"  dossier HTML alone                      {r['html']:8.2f} s   "
        f"{r['html'] / r['baseline']:5.2f}x  (target < 3x)"
    )
    print(
        f"  dossier HTML + Word                     {r['html_docx']:8.2f} s   "
        f"{r['html_docx'] / r['baseline']:5.2f}x"
    )
    print(
        f"  of HTML + Word: building figures {r['figures'] / r['html_docx']:.0%}, rendering "
        f"them to PNG {r['png'] / r['html_docx']:.0%}"
    )


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--estimates", type=int, default=2000)
    ap.add_argument("--repeat", type=int, default=2)
    args = ap.parse_args()

    from exposhift.io.synthetic import synthetic_sheet
    from exposhift.services.browse import evidence_overview
    from exposhift.services.demo import build_demo
    from exposhift.services.importing import import_into
    from exposhift.services.setup import init_database, open_current

    with tempfile.TemporaryDirectory() as tmp:
        work = Path(tmp)
        build_demo(work / "demo.db", user="bench")
        demo = open_current(str(work / "demo.db"), user="bench")
        pairs = evidence_overview(demo).pairs
        busiest = str(pairs.groupby("exposure")["estimates"].sum().idxmax())
        report("demo evidence base", measure(demo, busiest, work, args.repeat))
        demo.dispose()

        sheet = synthetic_sheet(args.estimates, prefix="BENCH")
        sheet["exposure"] = "synthetic-agent"
        sheet.to_csv(work / "sheet.csv", index=False)
        url = f"sqlite:///{work / 'synthetic.db'}"
        init_database(url, user="bench")
        syn = open_current(url, user="bench")
        import_into(syn, work / "sheet.csv")
        report(
            f"synthetic evidence base, {args.estimates} estimates of one exposure",
            measure(syn, "synthetic-agent", work, args.repeat),
        )
        syn.dispose()


if __name__ == "__main__":
    main()
