"""Judgements made from the camera image itself rather than from the tool keypoints.

* :mod:`~stationcheck.judgements.bin_activity`: something reaches into a part bin
  (:class:`~stationcheck.core.observations.BinActivity`).
* :mod:`~stationcheck.judgements.presence`: a fixture or part in a check zone is present or
  absent, compared with references taught at setup
  (:class:`~stationcheck.core.observations.CheckVerdict`).
* :mod:`~stationcheck.judgements.camera_shift`: the camera moved away from its reference view
  (:class:`~stationcheck.core.observations.CameraMoved`), with re-mapped zones on offer.

:class:`~stationcheck.judgements.station.StationJudgements` runs all three on each frame. Their
settings live in :mod:`~stationcheck.config.judgement_settings`, so the config schema owns them
without importing this package.
"""
