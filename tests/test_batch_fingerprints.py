"""Tests of pointsift.batch.fingerprints (reference: hashlib).

Every input is invented inside the test (tmp_path); outside references are named beside each check.
"""

from __future__ import annotations

import hashlib


from pointsift import batch
from pointsift.config import ScreenConfig


def test_fingerprint_covers_content_options_version_not_path(tmp_path):
    config = ScreenConfig(value="level_m")
    unit = batch.Unit(name="a", path=tmp_path / "a.gpkg", display="a.gpkg", config=config)
    moved = batch.Unit(name="a", path=tmp_path / "elsewhere" / "a.gpkg", display="elsewhere/a.gpkg", config=config)
    content = hashlib.sha256(b"some bytes").hexdigest()  # reference: hashlib
    base = batch.unit_fingerprint(unit, content, "1.0")
    assert len(base) == 64 and int(base, 16) >= 0
    assert batch.unit_fingerprint(moved, content, "1.0") == base
    assert batch.unit_fingerprint(unit, hashlib.sha256(b"other bytes").hexdigest(), "1.0") != base
    assert batch.unit_fingerprint(unit, content, "1.1") != base
    changed = batch.Unit(name="a", path=unit.path, display="a.gpkg", config=config.replace(k=11))
    assert batch.unit_fingerprint(changed, content, "1.0") != base
    grouped = batch.Unit(name="a", path=unit.path, display="a.gpkg", config=config, by="net", group="A")
    assert batch.unit_fingerprint(grouped, content, "1.0") != base
