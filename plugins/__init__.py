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
    "voltage_transducer",
    "power_transducer",
    "process_transmitter",
    "rtd_transmitter",
    "thermocouple_transmitter",
    "measured_output",
    "reading_methods",
    "counts_reading",
    "tolerance",
    "uncertainty",
    "decision_rules",
    "conformity",
    "linearity",
    "method_compare",
    "explain",
    "loop_split",
    "burden",
    "signal_integrity",
    "fault_signatures",
    "history",
    "drift",
    "intervals",
    "traceability",
    "export_csv",
    "handbook",
    "synth",
    "plugin_list",
)
