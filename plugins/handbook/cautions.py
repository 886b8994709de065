"""The safety cautions shown on the test sheet and on the pages that describe a test or a plan, chosen by
the asset's signal type, its registry row and the connection of the test (README's "Safety" section
lists them all).

Sources: /work/shared/domain.md's safety section (common practice). Every list ends with the caution that
local codes, the site's procedures and licensed practice take precedence.
"""

from __future__ import annotations

from typing import Any

#: shown on every page (the handbook's footer) and first on every sheet and test page
GENERAL = [
    "Isolate, lock out and prove dead before touching terminals; work under the site's permit-to-work "
    "and test-block procedures.",
    "Use instruments, leads and probes rated for the measurement category of the circuit.",
]
CT = ("Never open-circuit the secondary of a current transformer that may carry primary current: short it at "
      "the test block before disconnecting anything.")
VT = ("Never short-circuit the secondary of a voltage transformer: open its fuses or links at the test block "
      "before connecting a source.")
PROCESS = ("Isolate and vent the process connection and impulse lines before disconnecting the transmitter; "
           "mind trapped pressure and hot or toxic media.")
HAZARDOUS = ("This loop is in a hazardous area ({where}): use only certified test equipment whose entity "
             "parameters suit the intrinsically safe loop, under the site's hazardous-area permit.")
IN_LOOP = ("Tell the control room, and inhibit the trips, interlocks and alarms this signal drives, before "
           "injecting into the live loop; restore them and tell the control room when done.")
DEFER = ("Injection testing is for competent, authorised people only. Local codes, the site's procedures and "
         "licensed practice take precedence over anything on this page.")

#: every caution of the handbook's footer (any asset, any test)
ALL = [*GENERAL, CT, VT, PROCESS, IN_LOOP, DEFER]
#: the signal types whose input comes from a current transformer, or from a voltage transformer
_FROM_CT = ("current-transducer", "power-transducer")
_FROM_VT = ("voltage-transducer", "power-transducer")
#: the signal types connected to a process (pressure, DP, level) through a process connection
_PROCESS = ("process-transmitter",)


def hazardous(value: Any) -> str | None:
    """The ``hazardous_area`` cell as shown in the caution; None when blank, ``no``, ``false`` or ``0``."""
    if value is None or (isinstance(value, float) and value != value):
        return None
    text = str(value).strip()
    return None if text.lower() in ("", "no", "false", "0", "n") else text


def _given(value: Any) -> bool:
    return value is not None and not (isinstance(value, float) and value != value) and str(value).strip() != ""


def for_asset(reg: dict[str, Any] | Any, connection: str | None) -> list[str]:
    """The cautions for a test of the asset ``reg`` (its assets.csv row) with ``connection``: the hazards
    first, then the general ones, then what takes precedence."""
    signal = str(reg.get("signal") or "")
    out: list[str] = []
    where = hazardous(reg.get("hazardous_area"))
    if where is not None:
        out.append(HAZARDOUS.format(where=where if where.lower() not in ("yes", "true", "1", "y") else "marked in "
                                    "assets.csv"))
    if connection == "in-loop":
        out.append(IN_LOOP)
    if signal in _FROM_CT or _given(reg.get("ct_ratio")):
        out.append(CT)
    if signal in _FROM_VT or _given(reg.get("vt_ratio")):
        out.append(VT)
    if signal in _PROCESS:
        out.append(PROCESS)
    return [*out, *GENERAL, DEFER]
