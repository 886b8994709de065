"""Uncertainty: the GUM budget of every point (stage ``ll_uncertainty``); :mod:`.budget` holds its terms."""
