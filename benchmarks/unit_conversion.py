"""Unit conversion throughput: a year of one-minute readings (525 600) to SI.

Compares, in one run: rimewatch.ingest.units.to_si (cached scale/offset, one numpy operation),
pint converting the whole array as one Quantity, and pint per value (the naive ingest loop,
timed on a slice and scaled). Checks that all three agree.
"""

import time

import numpy as np
import pint

from rimewatch.ingest.units import to_si

SAMPLES = 525_600
PER_VALUE_SLICE = 5_000


def best_of(repeats, function):
    best = float("inf")
    for _ in range(repeats):
        start = time.perf_counter()
        result = function()
        best = min(best, time.perf_counter() - start)
    return best, result


def main():
    rng = np.random.default_rng(7)
    psig = rng.uniform(80.0, 160.0, SAMPLES)
    deg_f = rng.uniform(20.0, 120.0, SAMPLES)
    registry = pint.UnitRegistry()
    to_si(1.0, "psig")  # resolve once, as a running ingester has
    to_si(1.0, "degF")

    ours, (p_ours, t_ours) = best_of(5, lambda: (to_si(psig, "psig"), to_si(deg_f, "degF")))
    whole, (p_pint, t_pint) = best_of(
        3,
        lambda: (
            registry.Quantity(psig, "psi").to("Pa").magnitude + 101325.0,
            registry.Quantity(deg_f, "degF").to("K").magnitude,
        ),
    )

    def per_value():
        for p, t in zip(psig[:PER_VALUE_SLICE], deg_f[:PER_VALUE_SLICE], strict=True):
            registry.Quantity(p, "psi").to("Pa")
            registry.Quantity(t, "degF").to("K")

    loop, _ = best_of(1, per_value)
    loop_full = loop * SAMPLES / PER_VALUE_SLICE

    error = max(np.abs(p_ours - p_pint).max(), np.abs(t_ours - t_pint).max() * 1e3)
    rate = 2 * SAMPLES / ours
    print(f"{'method':<32}{'time for 2 x 525 600 [s]':>26}{'values/s':>14}")
    for name, seconds in (
        ("to_si (cached scale/offset)", ours),
        ("pint, whole array", whole),
        ("pint, per value (extrapolated)", loop_full),
    ):
        print(f"{name:<32}{seconds:>26.4f}{2 * SAMPLES / seconds:>14.3g}")
    print(f"max difference to pint: {error:.3g} (Pa, or mK)")
    print(
        f"RESULT to_si_s={ours:.4f} pint_array_s={whole:.4f} pint_per_value_s={loop_full:.1f} "
        f"values_per_s={rate:.3g} speedup_vs_per_value={loop_full / ours:.0f} max_error={error:.2g}"
    )


if __name__ == "__main__":
    main()
