"""Certainty of a body of evidence: settings, suggestions per domain, the summary table.

- :mod:`~exposhift.certainty.domains` — the level scale, the domains and their ratings;
- :mod:`~exposhift.certainty.settings` — the committee's settings (``data/certainty.toml``);
- :mod:`~exposhift.certainty.facts` — the numbers one cell's suggestions rest on;
- :mod:`~exposhift.certainty.suggestions` — one suggestion per domain, with reason and numbers;
- :mod:`~exposhift.certainty.judgement` — checking a committee's rating against the suggestion;
- :mod:`~exposhift.certainty.table` — the summary-of-evidence table of one exposure.

All pure: they take the outputs of the pooling and replication services and return dataclasses.
"""
