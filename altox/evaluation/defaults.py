"""Defaults shared by every command that simulates people (kept free of heavy imports for ``--help``).

``altox plan``, ``altox range`` and ``altox readings`` draw the same number of simulated people
with the same seed unless told otherwise, so one reading gets one expected range everywhere.
"""

#: simulated people per person in the expected range
ENSEMBLE_MEMBERS = 1000
#: seed of the expected range's random draws
ENSEMBLE_SEED = 20240601
