"""The operator screen: a full-screen browser page that shows the operator what to do next,
fed by the frame loop without ever holding it up (see :mod:`.feed`). Command-line options live
in :mod:`.options`, which imports nothing heavy."""
