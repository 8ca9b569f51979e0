"""Invented models shared by the judge's tests (TOML text)."""

from __future__ import annotations

__all__ = ["CONVEYOR", "PRESS_LINE", "late"]

# An invented press line: random arrivals, a conveyor with a random travel time into a single
# press (the only random input hold of the press: its holds are judged, censored by the press
# being busy), a chute with an exponential delay into a packer with a fixed duration (its start
# is known without a start column).
PRESS_LINE = """
[model]
name = "Press line"
time_unit = "s"

[[transitions]]
id = "arrive"
duration = {{ dist = "exponential", mean = 2.0 }}

[[transitions]]
id = "press"
duration = {{ dist = "gamma", mean = {press}, cv = 0.5 }}

[[transitions]]
id = "pack"
duration = 1.2

[[places]]
from = "arrive"
to = "arrive"
tokens = 1

[[places]]
from = "press"
to = "press"
tokens = 1

[[places]]
from = "pack"
to = "pack"
tokens = 1

[[places]]
from = "arrive"
to = "press"
hold = {conveyor}
label = "conveyor"

[[places]]
from = "press"
to = "pack"
hold = {{ dist = "exponential", mean = 0.5 }}
label = "chute"

[[places]]
from = "pack"
to = "press"
tokens = 4
label = "bins"
"""


CONVEYOR = '{ dist = "uniform", low = 0.5, high = 3.0 }'


def late(frame, firings, clock):
    """The same firings numbered ``firings`` later and ``clock`` time units later: a stretch
    of a long run's log far from its start (the firings that needed the initial tokens are
    then not judged: the firings they waited for are not in the log)."""
    out = frame.assign(firing=frame["firing"] + firings, time=frame["time"] + clock)
    if "start" in frame:
        out["start"] = frame["start"] + clock
    return out
