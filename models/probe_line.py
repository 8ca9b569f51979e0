"""A SimPy line written by hand, recorded by cyclecheck's probe and judged against its model.

    python models/probe_line.py                  # the line as models/probe_line.toml says
    python models/probe_line.py --slip rate      # the mill draws with mean 3.7 min, not 3.2
    python models/probe_line.py --slip fixtures  # the three-fixture limit is forgotten
    python models/probe_line.py --slip pooled    # one pooled resource of two inspectors

The model is plain SimPy, as engineers write one: a ``simpy.Resource`` per machine, one process
per casting, a resource of three fixtures and two inspectors that take parts in turn. The
probe adds one line per activity (``with probe.firing(...)``). Each run prints the verdict and
its reasons; the script exits 0 when the verdict is the expected one ("agrees" without a slip,
"disagrees" with one), 1 otherwise. An invented scenario (see models/probe_line.toml).
"""

from __future__ import annotations

import argparse
import sys
from pathlib import Path

import numpy as np
import simpy
from cyclecheck.simulate.probe import Probe

MODEL = Path(__file__).with_name("probe_line.toml")
SLIPS = ("rate", "fixtures", "pooled")


def valve_line(env: simpy.Environment, probe: Probe, rng: np.random.Generator, parts: int,
               slip: str | None = None) -> None:
    """Build the line in ``env``: ``parts`` castings arrive and go through it."""
    lathe = simpy.Resource(env, capacity=1)
    mill = simpy.Resource(env, capacity=1)
    fixtures = simpy.Resource(env, capacity=3)
    if slip == "pooled":
        pool = simpy.Resource(env, capacity=2)
        inspectors = [pool, pool]
    else:
        inspectors = [simpy.Resource(env, capacity=1), simpy.Resource(env, capacity=1)]
    mill_mean = 3.7 if slip == "rate" else 3.2
    sigma = np.sqrt(np.log1p(0.25**2))
    mu = np.log(mill_mean) - sigma**2 / 2

    def casting(n: int):
        fixture = None
        if slip != "fixtures":
            fixture = fixtures.request()
            yield fixture
        with lathe.request() as req:
            yield req
            with probe.firing("turn"):
                yield env.timeout(rng.triangular(2.0, 2.8, 4.5))
        yield env.timeout(rng.uniform(0.5, 1.5))  # the conveyor
        with mill.request() as req:
            yield req
            with probe.firing("mill"):
                yield env.timeout(rng.lognormal(mu, sigma))
        if fixture is not None:
            fixtures.release(fixture)
        inspector = inspectors[n % 2]  # in turn: odd parts to one, even parts to the other
        with inspector.request() as req:
            yield req
            # part n + 1 may start before part n (the other inspector was free): number the
            # firing by the part, as the model does (see the probe's documentation)
            with probe.firing("inspect", firing=n + 1):
                yield env.timeout(rng.uniform(5.0, 8.0))

    def arrivals():
        for n in range(parts):
            with probe.firing("arrive"):
                yield env.timeout(rng.exponential(4.0))
            env.process(casting(n))

    env.process(arrivals())


def run(slip: str | None = None, parts: int = 2000, seed: int = 2024) -> dict:
    """Simulate the line, record it with the probe and judge the log: the trace document."""
    env = simpy.Environment()
    probe = Probe(env)
    valve_line(env, probe, np.random.default_rng(seed), parts, slip)
    env.run()
    return probe.judge(MODEL, seed=1)


def main() -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--slip", choices=SLIPS, default=None)
    parser.add_argument("--parts", type=int, default=2000)
    parser.add_argument("--seed", type=int, default=2024)
    args = parser.parse_args()
    doc = run(args.slip, args.parts, args.seed)
    expected = "agrees" if args.slip is None else "disagrees"
    print(f"slip: {args.slip or 'none'}; verdict: {doc['verdict']} (expected {expected})")
    for reason in doc["reasons"][:5]:
        print(f"  - {reason}")
    return 0 if doc["verdict"] == expected else 1


if __name__ == "__main__":
    sys.exit(main())
