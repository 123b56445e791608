"""The cautions every output carries where the work can hurt someone.

One place for their wording, below every layer that prints them (CLI,
render, report, demo), so that none of those imports the CLI kit for them.
"""

#: Beside every A/B clip and blind trial: clips are written at the program's
#: level, and listening habits, not the tool, decide the sound pressure.
LISTENING_CAUTION = (
    "Listening caution: start playback at a low volume and raise it gradually; "
    "prolonged listening at high levels can damage hearing."
)

#: Beside every figure a spec sheet could quote.
ESTIMATE_CAUTION = (
    "These figures are engineering estimates from a model; verify them by measurement, "
    "and defer to the applicable product standards, local codes and licensed practice."
)

#: Beside every realised board: part values are a starting point.
BOARD_CAUTION = (
    "Engineering starting point: parts, layout and op-amp behaviour (bandwidth, slew, stability "
    "with capacitive loads) must be verified on the bench; defer to the applicable product "
    "standards and licensed practice."
)
