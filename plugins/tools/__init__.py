"""Commands that are not a stage: ``explain``, ``synth`` and ``plugins``."""
