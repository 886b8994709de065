"""Each built-in signal type takes an asset's input_unit only of its own kind (plugins/expected_output.py).

The kinds are pint's dimensionalities (pint, a general-purpose units library, is the reference): kA and
mA are currents, kV a voltage, MW and kVA powers ([mass]·[length]²/[time]³), K and degF temperatures;
a bar is a pressure and a metre a length. Which kind each transducer takes is common practice.
"""

from __future__ import annotations

import pandas as pd
import pint
import pytest
from loopledger import runner
from loopledger.plugins.signals import (
    current_transducer,
    power_transducer,
    process_transmitter,
    rtd_transmitter,
    thermocouple_transmitter,
    voltage_transducer,
)
from loopledger.plugins.signals.expected_output import wrong_kind

SIGNALS = {"current-transducer": current_transducer.CurrentTransducer(),
           "voltage-transducer": voltage_transducer.VoltageTransducer(),
           "power-transducer": power_transducer.PowerTransducer(),
           "rtd-transmitter": rtd_transmitter.RtdTransmitter(),
           "thermocouple-transmitter": thermocouple_transmitter.ThermocoupleTransmitter()}
TAKES = {"current-transducer": ["A", "kA", "mA"], "voltage-transducer": ["V", "kV", "mV"],
         "power-transducer": ["W", "kW", "MW", "kVA"], "rtd-transmitter": ["degC", "°C", "K", "degF"],
         "thermocouple-transmitter": ["degC", "K", "degF"]}
OTHERS = ["A", "V", "kW", "degC", "bar", "m", "%"]


@pytest.mark.parametrize("signal", sorted(SIGNALS))
def test_each_signal_takes_its_own_kind_and_no_other(signal: str) -> None:
    handler = SIGNALS[signal]
    ureg = pint.UnitRegistry()
    own = {str(ureg.Unit(u.replace("°C", "degC")).dimensionality) for u in TAKES[signal]}
    assert len(own) == 1  # the reference agrees the names it takes are of one kind
    refused = [u for u in OTHERS if str(ureg.Unit(u.replace("%", "percent")).dimensionality) not in own]
    units = TAKES[signal] + refused
    points = pd.DataFrame({"asset": [f"X{i}" for i in range(len(units))], "input_unit": units})
    assert wrong_kind(points, handler) == {f"X{i}": u for i, u in enumerate(units) if u in refused}
    assert len(refused) == len(OTHERS) - 1  # exactly one of the others is its own kind


def test_a_process_transmitter_takes_any_unit() -> None:
    """Pressure, level, flow or % of a range: the process transmitter declares no kind."""
    points = pd.DataFrame({"asset": ["P1", "P2", "P3"], "input_unit": ["bar", "m", "m^3/h"]})
    assert wrong_kind(points, process_transmitter.ProcessTransmitter()) == {}


def test_a_plugin_declaring_something_not_a_unit_is_a_configuration_error(tmp_path, pm) -> None:
    """A site plugin's typing slip (``ampre`` is not among pint's names) is refused before any
    file is judged, naming the signal type, rather than crashing the expected stage."""
    from loopledger.config import ConfigError
    from loopledger.contracts import SignalType
    from loopledger.hookspecs import hookimpl

    from tests.evidence import write_evidence

    class Slip(SignalType):
        name = "slip-transducer"
        input_units = ("ampre",)

    class Plugin:
        @hookimpl
        def ll_signal_types(self) -> list[SignalType]:
            return [Slip()]

    pm.register(Plugin())
    with pytest.raises(ConfigError, match="signal type 'slip-transducer' declares input_units 'ampre'"):
        runner.run(runner.RunOptions(write_evidence(tmp_path / "ev", {})), pm)
