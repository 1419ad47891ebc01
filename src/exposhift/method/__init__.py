"""The method of an evidence base as named, versioned parts (pure: no store, no services).

:mod:`.parts` holds the registry :data:`~exposhift.method.parts.METHOD_PARTS`: each part (the
appraisal rubric, the replication/pooling settings, ...) names its file, its packaged default
and the function that checks its text. The evidence base stores the text of each version
(:mod:`exposhift.store.method_records`); :mod:`exposhift.services.workspace` puts the two
together. See docs/method.md.
"""
