"""Analyses after judgement (stage ``ll_analyse``): linearity, method comparison, loop burden and the
conductor tables it uses, signal integrity (NE 43), fault signatures."""
