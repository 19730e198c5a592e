#!/usr/bin/python3
"""Choose the two separator pressures of the Kestrel Ridge train that
maximise stabilised liquid, with fugad doing every flash.

The scenario is invented for this example (a fictional plant and well
stream). The train is:

  1. inlet separator at T1 = 320 K and pressure P1 (chosen),
  2. low-pressure separator at T2 = 310 K and pressure P2 (chosen), fed
     with the liquid of stage 1,
  3. stock tank at 288.15 K and 101 325 Pa (fixed), fed with the liquid of
     stage 2.

The objective is the stabilised liquid, the moles of stock-tank liquid
per mole of well stream,

    N(P1, P2) = L1(P1) * L2(P1, P2) * L3(P1, P2),

where Lk is the liquid fraction of stage k's own feed from a T-P flash.
Without the fixed stock tank the liquid of stage 2 would only grow with P2
and the best P2 would sit on its bound; the stock tank is what makes the
trade-off (gas flashed off early carries fewer intermediates with it).

The search runs on u = (ln P1, ln P2) with scipy's bounded L-BFGS-B; each
evaluation flashes the point and its four central-difference neighbours
(step 1e-4 in ln P) together, one FlashBatch call per stage, so a gradient
costs three calls. Every call has a deadline, and the channel's service
config retries UNAVAILABLE (load shedding, a replica draining) with
backoff; no other code is retried.

Usage:
    /usr/bin/python3 separator_optimiser.py --target HOST:PORT [--output FILE]

Results are engineering estimates from a published cubic equation of state
(Peng-Robinson 1978) with the limits stated in fugad's documentation. They
are no basis on their own for the design, rating or relief of separators
or any other pressure equipment: that follows the applicable codes and
standards and is a matter for licensed engineers.
"""

import argparse
import json
import math
import os
import sys
import time

_STUBS = os.path.join(os.path.dirname(os.path.abspath(__file__)), "..", "stubs")
if os.path.isdir(_STUBS) and _STUBS not in sys.path:
    sys.path.insert(0, _STUBS)

import grpc  # noqa: E402  (Debian: python3-grpcio)
import numpy as np  # noqa: E402
from scipy.optimize import minimize  # noqa: E402  (Debian: python3-scipy)

from fugad.v1 import flash_pb2, fluid_pb2, fugad_service_pb2_grpc, solver_pb2  # noqa: E402

PLANT = "Kestrel Ridge (fictional)"

# Invented well stream of the fictional Kestrel Ridge field, mole fractions.
WELL_STREAM = [
    ("nitrogen", 0.004),
    ("carbon-dioxide", 0.012),
    ("methane", 0.380),
    ("ethane", 0.085),
    ("propane", 0.070),
    ("isobutane", 0.018),
    ("n-butane", 0.032),
    ("isopentane", 0.015),
    ("n-pentane", 0.018),
    ("n-hexane", 0.030),
    ("n-heptane", 0.050),
    ("n-octane", 0.060),
    ("n-decane", 0.080),
    ("n-dodecane", 0.146),
]

T1_K = 320.0  # inlet separator temperature
T2_K = 310.0  # low-pressure separator temperature
T3_K = 288.15  # stock tank temperature
P3_PA = 101325.0  # stock tank pressure

# Search bounds, Pa. Disjoint, so that stage 2 always runs below stage 1.
P1_BOUNDS = (1.2e6, 8.0e6)
P2_BOUNDS = (1.5e5, 1.0e6)
START = (4.0e6, 3.0e5)

FD_STEP = 1e-4  # central-difference step in ln P

# Retry UNAVAILABLE only (see deploy/README.md); every call also carries
# its own deadline (--deadline).
SERVICE_CONFIG = json.dumps({
    "methodConfig": [{
        "name": [{"service": "fugad.v1.FugadService"}],
        "timeout": "30s",
        "retryPolicy": {
            "maxAttempts": 5,
            "initialBackoff": "0.05s",
            "maxBackoff": "1s",
            "backoffMultiplier": 2,
            "retryableStatusCodes": ["UNAVAILABLE"],
        },
    }],
})


class FlashError(Exception):
    """A state of a batch came back with an error status."""


def well_fluid():
    """The fluid of the well stream, PR78 with the library's k_ij."""
    return fluid_pb2.Fluid(
        model=fluid_pb2.MODEL_PR78,
        components=[fluid_pb2.ComponentSpec(id=name) for name, _ in WELL_STREAM],
    )


def stage_liquid(result):
    """Liquid amount (fraction of the stage feed) and composition.

    A single liquid phase is all liquid; a single vapour phase leaves no
    liquid (None composition). Two liquids are not expected for this
    water-free stream and are reported as an error.
    """
    liquids = [p for p in result.phases if p.label == solver_pb2.PHASE_LABEL_LIQUID]
    if not liquids:
        return 0.0, None
    if len(liquids) > 1:
        raise FlashError("%d liquid phases at %.6g K, %.6g Pa" % (len(liquids), result.temperature_k, result.pressure_pa))
    return liquids[0].amount, list(liquids[0].mole_fractions)


class Train:
    """The separator train, evaluated through fugad."""

    def __init__(self, stub, deadline_s):
        self.stub = stub
        self.deadline_s = deadline_s
        self.fluid = well_fluid()
        self.feed = [x for _, x in WELL_STREAM]
        self.calls = 0
        self.states = 0

    def _flash_batch(self, temperature_k, pressures, feeds):
        """Flash feeds[i] at (temperature_k, pressures[i]); one call."""
        states = [
            flash_pb2.FlashState(
                mole_fractions=z,
                tp=flash_pb2.TemperaturePressure(temperature_k=temperature_k, pressure_pa=p),
            )
            for p, z in zip(pressures, feeds)
        ]
        resp = self.stub.FlashBatch(
            flash_pb2.FlashBatchRequest(fluid=self.fluid, states=states),
            timeout=self.deadline_s,
        )
        self.calls += 1
        self.states += len(states)
        out = []
        for i, item in enumerate(resp.items):
            if item.status.code != 0:
                raise FlashError("state %d (%.6g K, %.6g Pa): code %d: %s" % (i, temperature_k, pressures[i], item.status.code, item.status.message))
            out.append(item.result)
        return out

    def stabilised_liquid(self, points):
        """N(P1, P2) for each (P1, P2) in points, in three FlashBatch calls."""
        n = len(points)
        amount = [1.0] * n
        feeds = [self.feed] * n
        for stage, temperature_k in enumerate((T1_K, T2_K, T3_K)):
            live = [i for i in range(n) if feeds[i] is not None]
            if not live:
                break
            pressures = [points[i][stage] if stage < 2 else P3_PA for i in live]
            results = self._flash_batch(temperature_k, pressures, [feeds[i] for i in live])
            for i, res in zip(live, results):
                liquid, x = stage_liquid(res)
                amount[i] *= liquid
                feeds[i] = x
        return [a if feeds[i] is not None else 0.0 for i, a in enumerate(amount)]


def optimise(train):
    """Maximise N over the bounds; returns (P1, P2, N, scipy result)."""
    evaluations = []

    def negative_with_gradient(u):
        h = FD_STEP
        stencil = [u, u + [h, 0], u - [h, 0], u + [0, h], u - [0, h]]
        values = train.stabilised_liquid([tuple(np.exp(v)) for v in stencil])
        evaluations.append((float(u[0]), float(u[1]), values[0]))
        grad = np.array([(values[1] - values[2]) / (2 * h), (values[3] - values[4]) / (2 * h)])
        return -values[0], -grad

    bounds = [tuple(math.log(b) for b in P1_BOUNDS), tuple(math.log(b) for b in P2_BOUNDS)]
    u0 = np.log(np.array(START))
    res = minimize(
        negative_with_gradient,
        u0,
        jac=True,
        method="L-BFGS-B",
        bounds=bounds,
        options={"ftol": 1e-13, "gtol": 1e-9, "maxiter": 200},
    )
    p1, p2 = (float(v) for v in np.exp(res.x))
    # The objective at the returned point itself (the optimiser's last
    # evaluation need not be its answer).
    best = train.stabilised_liquid([(p1, p2)])[0]
    return p1, p2, best, res, len(evaluations)


def main(argv=None):
    ap = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    ap.add_argument("--target", default="localhost:50051", help="fugad address, HOST:PORT (default %(default)s)")
    ap.add_argument("--output", default="separator_optimum.json", help="JSON file for the optimum (default %(default)s)")
    ap.add_argument("--deadline", type=float, default=10.0, help="deadline of each call, seconds (default %(default)s)")
    args = ap.parse_args(argv)

    options = [("grpc.service_config", SERVICE_CONFIG), ("grpc.enable_retries", 1)]
    start = time.monotonic()
    with grpc.insecure_channel(args.target, options=options) as channel:
        grpc.channel_ready_future(channel).result(timeout=args.deadline)
        train = Train(fugad_service_pb2_grpc.FugadServiceStub(channel), args.deadline)
        try:
            p1, p2, best, res, n_eval = optimise(train)
        except grpc.RpcError as e:
            print("fugad call failed: %s: %s" % (e.code(), e.details()), file=sys.stderr)
            return 1
        except FlashError as e:
            print("flash failed: %s" % e, file=sys.stderr)
            return 1
    elapsed = time.monotonic() - start

    optimum = {
        "plant": PLANT,
        "stage_temperatures_k": [T1_K, T2_K, T3_K],
        "stock_tank_pressure_pa": P3_PA,
        "inlet_separator_pressure_pa": p1,
        "low_pressure_separator_pressure_pa": p2,
        "stabilised_liquid_mol_per_mol_feed": best,
        "optimiser": "scipy.optimize.minimize L-BFGS-B on (ln P1, ln P2)",
        "optimiser_success": bool(res.success),
        "optimiser_message": str(res.message),
        "iterations": int(res.nit),
        "evaluations": n_eval,
        "flash_batch_calls": train.calls,
        "states_flashed": train.states,
        "note": "Engineering estimate for a fictional plant; not a basis for separator or relief design.",
    }
    with open(args.output, "w", encoding="utf-8") as f:
        json.dump(optimum, f, indent=2)
        f.write("\n")

    print("%s separator train" % PLANT)
    print("  inlet separator   %7.1f K  %10.4f MPa" % (T1_K, p1 / 1e6))
    print("  LP separator      %7.1f K  %10.4f MPa" % (T2_K, p2 / 1e6))
    print("  stock tank        %7.2f K  %10.4f MPa (fixed)" % (T3_K, P3_PA / 1e6))
    print("  stabilised liquid %.9f mol per mol of well stream" % best)
    print("  %s after %d iterations, %d FlashBatch calls (%d states) in %.2f s" % (
        "converged" if res.success else "stopped: " + str(res.message), res.nit, train.calls, train.states, elapsed))
    print("  written to %s" % args.output)
    print("Estimates only: separator, relief and pressure-system design follows the applicable codes and licensed engineers.")
    return 0 if res.success else 2


if __name__ == "__main__":
    sys.exit(main())
