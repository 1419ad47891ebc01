"""The dossier names the method that made it: manifest entries and a fingerprint that moves
when the stored rubric changes. The hash is recomputed with ``hashlib.sha256`` (FIPS 180-4)."""

from __future__ import annotations

import hashlib

from exposhift.appraisal.rubric import packaged_rubric_path
from exposhift.dossier.manifest import manifest
from exposhift.services.dossier import gather
from exposhift.services.workspace import method_in_force, set_method_part


def test_manifest_names_method_versions_and_the_fingerprint_follows_the_rubric(demo_copy, tmp_path):
    before = gather(demo_copy, "trelomene", as_of="2026-12-01")
    packaged = packaged_rubric_path().read_bytes()
    m = manifest(before.dossier, before.records, before.settings, {})
    assert m["method"]["rubric"]["number"] == 1
    assert m["method"]["rubric"]["content_hash"] == hashlib.sha256(packaged).hexdigest()
    assert m["method"]["settings"]["one_run_override"] is None
    assert m["settings"]["method"]["rubric"]["content_hash"] == hashlib.sha256(packaged).hexdigest()
    strict = tmp_path / "strict.toml"
    strict.write_bytes(
        packaged.replace(b"exclude_from_pooling = [0]", b"exclude_from_pooling = [0, 1]")
    )
    set_method_part(demo_copy, "rubric", strict)
    after = gather(demo_copy, "trelomene", as_of="2026-12-01")
    m2 = manifest(after.dossier, after.records, after.settings, {})
    assert m2["method"]["rubric"]["number"] == 2
    assert after.dossier.provenance.fingerprint != before.dossier.provenance.fingerprint
    # an override names its file and is not stored
    over = method_in_force(demo_copy, {"rubric": packaged_rubric_path()})
    third = gather(demo_copy, "trelomene", as_of="2026-12-01", method=over)
    m3 = manifest(third.dossier, third.records, third.settings, {})
    assert m3["method"]["rubric"]["one_run_override"] == str(packaged_rubric_path())
    assert third.dossier.provenance.fingerprint == before.dossier.provenance.fingerprint
    assert method_in_force(demo_copy).parts["rubric"].number == 2
