"""Built-in plugins. Each module is registered with the same call an installed plugin goes through.

The order below is registration order only; the run order is set by the
stage hooks in :mod:`loopledger.hookspecs`.
"""

BUILTIN: tuple[str, ...] = (
    "read_yaml",
    "read_table",
    "schema_check",
    "expected_output",
    "current_transducer",
    "measured_output",
    "reading_methods",
    "tolerance",
    "export_csv",
    "handbook",
    "synth",
)
