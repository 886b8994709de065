"""Built-in plugins, one subpackage per stage, listed in the order a run calls them.

Each module named in :data:`BUILTIN` is registered with the same ``register`` call an installed plugin
goes through, under the module's last name (``read_yaml``, ``burden``, ...). The run order itself is set
by the stage hooks in :mod:`loopledger.hookspecs`; the list follows it so the architecture can be read
from the files:

read → check → signals (expected) → measure → uncertainty → judge → analyse → history → export → handbook

``sheet`` and ``tools`` add commands; ``examples`` holds an installable site plugin that imports only
:mod:`loopledger.api`.
"""

BUILTIN: tuple[str, ...] = (
    # read: each result file into a header and points
    "read.read_yaml",
    "read.read_table",
    # ll_check
    "check.schema_check",
    # ll_expected, and the signal types it dispatches to
    "signals.expected_output",
    "signals.current_transducer",
    "signals.voltage_transducer",
    "signals.power_transducer",
    "signals.process_transmitter",
    "signals.rtd_transmitter",
    "signals.thermocouple_transmitter",
    # ll_measured, and the reading methods
    "measure.measured_output",
    "measure.reading_methods",
    "measure.counts_reading",
    "measure.source_range",
    # ll_uncertainty
    "uncertainty.uncertainty",
    # ll_judge, and the decision rules
    "judge.tolerance",
    "judge.decision_rules",
    "judge.conformity",
    # ll_analyse
    "analyse.linearity",
    "analyse.method_compare",
    "analyse.loop_split",
    "analyse.burden",
    "analyse.loop_plan",
    "analyse.signal_integrity",
    "analyse.fault_signatures",
    # ll_history
    "history.history",
    "history.failures",
    "history.drift",
    "history.intervals",
    "history.traceability",
    "history.changes",
    # ll_export_tables
    "export.export_csv",
    # ll_publish
    "handbook",
    # commands
    "sheet",
    "tools.explain",
    "tools.synth",
    "tools.plugin_list",
)
