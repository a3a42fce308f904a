"""Numerical machinery with no science in it: keyed random streams and chunked drawing of a linear
model (:mod:`.draws`), fast exact percentiles of many rows (:mod:`.percentiles`)."""
