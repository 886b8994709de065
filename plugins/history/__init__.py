"""History across an asset's tests (stage ``ll_history``): the asset summary, drift, intervals and the
traceability of reference instruments."""
