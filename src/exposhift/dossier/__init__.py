"""The hazard dossier: one exposure's evidence as a reproducible report.

- :mod:`~exposhift.dossier.content` — what a dossier says (typed dataclasses);
- :mod:`~exposhift.dossier.evidence` — the one adapter from the services' results;
- :mod:`~exposhift.dossier.certainty` — the certainty section ("not yet rated" for now);
- :mod:`~exposhift.dossier.manifest` — fingerprint, manifest and data tables;
- :mod:`~exposhift.dossier.figures` / :mod:`~exposhift.dossier.images` — plotly figures and
  their offline PNG rendering;
- :mod:`~exposhift.dossier.html` / :mod:`~exposhift.dossier.docx` — the two documents;
- :mod:`~exposhift.dossier.bundle` / :mod:`~exposhift.dossier.diff` — the bundle on disk and
  what changed between two bundles.

The service :mod:`exposhift.services.dossier` puts them together.
"""
