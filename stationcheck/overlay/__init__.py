"""What the station shows a person (:mod:`~stationcheck.overlay.station_view`), and drawing it on
camera frames: zones, the tool tip, the enable state, step progress and alarms. The screens and
the replay's annotated video (:mod:`stationcheck.pipeline.annotated_video`) use it; it needs only
the core.

Colours carry IEC 60073 meanings (green normal, yellow abnormal, red fault, blue operator
action required, white neutral) and every coloured mark is doubled by a symbol or words, so
nothing depends on telling colours apart.
"""
