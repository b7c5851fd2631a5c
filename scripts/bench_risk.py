"""Time the fit probability: 10,000 draws for a plan of 300 three-point efforts.

Prints, for the table sampler (the default) and the exact one (numpy's Generator.beta):
the one-off cost of the quantile tables, the median and 95th percentile of repeated runs
with one and two threads, for independent efforts and with a shared overrun, and the cost
of Generator.beta alone on the same shapes. Also what a per-plan table of exact quantiles
would cost, the alternative to interpolating between tabulated shapes.

The machine's load average is printed first: other work on the machine slows every figure,
so compare runs taken at low load. Beside the wall-clock figures, the CPU time of all the
process's threads shows the work done, which other work disturbs less.

Run from the repository root: `PYTHONPATH=. .venv/bin/python scripts/bench_risk.py`.
"""

from __future__ import annotations

import argparse
import os
import platform
import statistics
import time
from collections.abc import Callable

import numpy as np
from scipy import special

from server.selector import risk
from server.selector.risk import ThreePoint, fit_probability, pert_beta_shapes, pert_mean


def plan(initiatives: int, seed: int) -> list[ThreePoint]:
    """Every effort uncertain (the worst case: certain efforts cost nothing to sample)."""
    rng = np.random.default_rng(seed)
    out = []
    for _ in range(initiatives):
        low = rng.uniform(0.5, 5)
        likely = low + rng.uniform(0, 5)
        out.append(ThreePoint(low, likely, likely + rng.uniform(0.5, 10)))
    return out


def timings(
    cases: dict[str, Callable[[], object]], runs: int
) -> dict[str, tuple[list[float], list[float]]]:
    """Wall-clock and CPU seconds (all threads of this process) of each run of each case.

    The cases take turns, run after run, so that a burst of other work on the machine
    slows them all alike instead of whichever case happened to be running.
    """
    for run in cases.values():
        run()  # warm-up: first-call costs are reported separately
    out: dict[str, tuple[list[float], list[float]]] = {label: ([], []) for label in cases}
    for _ in range(runs):
        for label, run in cases.items():
            start, start_cpu = time.perf_counter(), time.process_time()
            run()
            out[label][0].append(time.perf_counter() - start)
            out[label][1].append(time.process_time() - start_cpu)
    return out


def summary(label: str, seconds: tuple[list[float], list[float]]) -> str:
    wall, cpu = seconds
    ms = sorted(1000 * s for s in wall)
    p95 = ms[min(len(ms) - 1, round(0.95 * (len(ms) - 1)))]
    return (
        f"{label:<46} median {statistics.median(ms):6.1f} ms   p95 {p95:6.1f} ms   "
        f"cpu median {1000 * statistics.median(cpu):6.1f} ms"
    )


def once(run: Callable[[], object]) -> float:
    start = time.perf_counter()
    run()
    return 1000 * (time.perf_counter() - start)


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--initiatives", type=int, default=300)
    parser.add_argument("--draws", type=int, default=10_000)
    parser.add_argument("--runs", type=int, default=30)
    args = parser.parse_args()

    estimates = plan(args.initiatives, seed=1)
    capacity = sum(pert_mean(e) for e in estimates) * 1.02
    draws = args.draws
    load = ", ".join(f"{x:.2f}" for x in os.getloadavg())
    print(
        f"{args.initiatives} initiatives, {draws:,} draws, {args.runs} runs each; "
        f"numpy {np.__version__}, python {platform.python_version()}, "
        f"{os.cpu_count()} logical CPUs; load average {load}"
    )

    grid_ms = once(risk._quantile_grid)
    grid = risk._quantile_grid()
    grid_kib = (grid.body.nbytes + grid.ends.nbytes) / 1024
    print(f"quantile grid, once per process: {grid_ms:.1f} ms, {grid_kib:.0f} KiB")
    alphas = np.array([pert_beta_shapes(e)[0] for e in estimates])
    plan_ms = statistics.median(once(lambda: risk._plan_table(alphas)) for _ in range(20))
    table = risk._plan_table(alphas)
    plan_kib = (table.body.nbytes + table.ends.nbytes) / 1024
    print(
        f"plan table, every call ({np.unique(alphas).size} distinct shapes): "
        f"median {plan_ms:.2f} ms, {plan_kib:.0f} KiB"
    )
    knots = np.arange(1024) / 1024
    exact_ms = once(lambda: special.betaincinv(alphas[:, None], 6 - alphas[:, None], knots))
    print(f"instead: exact per-plan table, betaincinv at 1,024 levels per shape: {exact_ms:.0f} ms")

    start = time.perf_counter()
    first = fit_probability(estimates, capacity, draws=draws)
    print(f"first call (includes thread start): {1000 * (time.perf_counter() - start):.1f} ms")
    exact = fit_probability(estimates, capacity, draws=draws, method="exact")
    print(f"independent: table {first.label()}, exact {exact.label()}   seed {first.seed}")
    shared = fit_probability(estimates, capacity, draws=draws, shared_overrun=0.1)
    shared_exact = fit_probability(
        estimates, capacity, draws=draws, shared_overrun=0.1, method="exact"
    )
    print(f"shared overrun 0.1: table {shared.label()}, exact {shared_exact.label()}")

    cases: dict[str, Callable[[], object]] = {}
    for method in ("table", "exact"):
        for overrun in (0.0, 0.1):
            for workers in (1, 2):
                label = (
                    f"{method}, {'shared overrun 0.1' if overrun else 'independent'}, "
                    f"{workers} thread{'s' if workers > 1 else ''}"
                )
                options = {"method": method, "shared_overrun": overrun, "workers": workers}

                def run(options: dict[str, object] = options) -> object:
                    return fit_probability(estimates, capacity, draws=draws, **options)  # type: ignore[arg-type]

                cases[label] = run

    shapes = np.array([pert_beta_shapes(e) for e in estimates])
    rng = np.random.default_rng(2)

    def beta_alone() -> object:
        return rng.beta(shapes[:, 0], shapes[:, 1], size=(draws, len(estimates)))

    cases["floor of exact: Generator.beta alone, 1 thread"] = beta_alone
    for label, seconds in timings(cases, args.runs).items():
        print(summary(label, seconds))


if __name__ == "__main__":
    main()
