"""A short fault soak: the real frame path on the sample video's ground truth, looped, with
every fault kind injected; 0 false enables and every fault inhibited within 100 ms of being
detectable. The million-frame run with the model's answers is ``stationcheck soak`` (README).
"""

from __future__ import annotations

from pathlib import Path

import pytest

from stationcheck.soak.faults import KINDS
from stationcheck.soak.footage import Footage, load_footage
from stationcheck.soak.runner import Soak

SAMPLE = Path(__file__).resolve().parents[2] / "sample_video"
CONFIG = SAMPLE.parent / "configs" / "demo_station.yaml"

pytestmark = pytest.mark.skipif(not (SAMPLE / "demo_station_truth.csv").is_file(),
                                reason="the sample video's sidecars are not rendered")


@pytest.fixture(scope="module")
def footage() -> Footage:
    return load_footage(CONFIG, SAMPLE / "demo_station.mp4", SAMPLE / "demo_station_inputs.jsonl",
                        SAMPLE / "demo_station_truth.csv", keypoints="truth")


def test_ten_thousand_frames_of_faults_give_no_false_enable(footage: Footage) -> None:
    report = Soak(footage, seed=3).run(10_000)
    per_kind = report.per_kind()
    assert report.frames == 10_000
    assert report.false_enables == 0, report.false_enable_frames
    assert report.over_bound == 0, per_kind
    assert all(per_kind[kind]["injected"] > 0 for kind in KINDS), per_kind
    found_on = [kind for kind in KINDS if per_kind[kind]["enabled_at_detectable"] > 0]
    assert len(found_on) >= 6, per_kind  # most kinds really caught the enable on
    assert all(per_kind[kind]["max_ms"] <= 100.0 for kind in found_on)
    repeated = per_kind["result_repeated"]
    assert repeated["ignored"] == repeated["injected"]


def test_the_soak_fails_a_sequencer_that_ignores_faults(
    footage: Footage, monkeypatch: pytest.MonkeyPatch,
) -> None:
    """The measurement can fail: with the fault rule of the enable switched off, faults keep
    the enable on past the bound and the true tip leaves the target meanwhile."""
    from stationcheck.core import conditions

    monkeypatch.setattr(conditions, "_fault", lambda tx: None)
    report = Soak(footage, seed=3).run(4_000)
    assert report.over_bound > 0
    assert not report.passed


def test_a_bound_below_the_watchdog_cycle_is_reported_as_missed(footage: Footage) -> None:
    report = Soak(footage, seed=3, bound_ms=1.0).run(8_000)
    assert report.over_bound > 0  # a stall is seen one 10 ms watchdog cycle late
    assert not report.passed
