"""Measured value: each point's output in output units, per reading method (stage ``ll_measured``)."""
