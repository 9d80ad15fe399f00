"""The clinical caution shown by every face of the tool (app, CLI, reports). Imports nothing."""

CAUTION = (
    "Planning and audit aid only: not a monitor and not a prescription. Continuous inspired-O2 and "
    "agent monitoring is mandatory at low flow. Follow the agent's local labelling, local codes and "
    "licensed clinical practice."
)
