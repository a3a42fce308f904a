"""Co-registration on sample windows (peatburn.engine.alignment) against the synthetic truth of tests/conftest.py."""

import pytest

import peatburn
from peatburn.engine import alignment
from peatburn.engine.inputs import open_inputs


@pytest.mark.parametrize("min_stable", [0, 10**9], ids=["window-mosaic", "decimated-fallback"])
def test_coregistration_on_sample_windows(scene, monkeypatch, min_stable):
    """A survey larger than the sample budget: the shift is estimated on a mosaic of 6 of the 20
    blocks (or, when those hold too little stable ground, on a decimated view of the whole grid)
    and still recovers the synthetic georeferencing error and datum offset (tests/conftest.py
    truth; tolerances as in tests/engine/test_runner.py test_recovers_shift_offset_and_total)."""
    monkeypatch.setattr(alignment, "SAMPLE_PIXELS", 64 * 64 * 6)
    monkeypatch.setattr(alignment, "MIN_WINDOW_STABLE", min_stable)
    inputs = open_inputs(peatburn.load_config(scene.config))
    assert len(alignment.sample_windows(inputs.grid, 64)) == 6 < len(inputs.grid.windows(64))
    al = alignment.coregister(inputs)
    assert al.sample_decimation == (1 if min_stable == 0 else 2)
    sx, sy = scene.truth["shift"]
    assert al.shift_x == pytest.approx(-sx, abs=0.1)
    assert al.shift_y == pytest.approx(-sy, abs=0.1)
    assert al.shift_z == pytest.approx(-scene.truth["offset"], abs=0.01)
    assert 0.04 < al.nmad_after < 0.08 < al.nmad_before
