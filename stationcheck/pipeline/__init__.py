"""The per-frame path and the loop that joins the edges to the pure core.

frame source -> detector -> tracker -> zones -> image judgements -> sequencer -> outputs and
events -> step log. Station inputs (serials, tool running, tightening results, acknowledges)
are merged into the frame stream by time (:mod:`station_inputs`). Every observation the
sequencer sees can be recorded (:mod:`observation_stream`) and replayed without the video to
the identical events. The annotated video (:mod:`annotated_video`) is one of the frame sinks;
what it draws comes from :mod:`stationcheck.overlay`.
"""
