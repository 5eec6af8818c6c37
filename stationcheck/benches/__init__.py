"""Measurements: the sections of ``stationcheck bench`` and two measuring programs.

Each ``bench_*`` module is one section (see :mod:`stationcheck.benches.measuring`);
:mod:`~stationcheck.benches.look_matrix` and :mod:`~stationcheck.benches.truth_comparison`
measure the image judgements on rendered demo footage (``python -m``). Benches sit above every
part they measure and below the CLI, which only parses options and prints what they return.
"""
