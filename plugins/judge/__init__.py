"""Judgement: error, MPE and the decision rule in force, per point and per test (stage ``ll_judge``)."""
