"""Expected value: what each point's output should be, per signal type (stage ``ll_expected``).

The signal types (current, voltage, power transducers; process, RTD and thermocouple transmitters) and
the sensor libraries they use (:mod:`.rtd`, :mod:`.thermocouple`) live here."""
