"""Speed of the closed-form Walderhaug (1996) cement against a numerical ODE solve.

Prints paths per second for :func:`porecast.physics.diagenesis.quartz_cement`
on 10^6 paths x 10 segments and for ``scipy.integrate.solve_ivp`` of the same
rate law on 200 paths, and the ratio. Run: ``python3 benchmarks/cement.py``.
"""

from __future__ import annotations

import argparse
import time

import numpy as np
from scipy.integrate import solve_ivp

from porecast.physics.diagenesis import (
    QUARTZ_DENSITY_G_PER_CM3,
    QUARTZ_MOLAR_MASS_G_PER_MOL,
    SECONDS_PER_MA,
    WALDERHAUG_A_MOL_PER_CM2_S,
    WALDERHAUG_B_PER_C,
    quartz_cement,
    walderhaug_surface_area,
)

PARAMS = {"grain_size_mm": 0.25, "quartz_fraction": 0.63, "coating_fraction": 0.05,
          "porosity_onset": 0.30, "onset_c": 70.0}


def ode_path(ages, temps, area0, phi0, onset_c, rtol):
    """Cement at every age by solve_ivp (DOP853), restarted at each control age."""
    elapsed = ages[0] - ages

    def rhs(tau, v):
        t = np.interp(tau, elapsed, temps)
        if t < onset_c:
            return [0.0]
        rate = WALDERHAUG_A_MOL_PER_CM2_S * 10.0 ** (WALDERHAUG_B_PER_C * t)
        return [QUARTZ_MOLAR_MASS_G_PER_MOL * area0 * (1.0 - v[0] / phi0) * rate
                / QUARTZ_DENSITY_G_PER_CM3 * SECONDS_PER_MA]

    out = [0.0]
    for j in range(len(ages) - 1):
        sol = solve_ivp(rhs, (elapsed[j], elapsed[j + 1]), [out[-1]], method="DOP853",
                        rtol=rtol, atol=1e-14)
        out.append(float(sol.y[0, -1]))
    return np.array(out)


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__)
    parser.add_argument("--paths", type=int, default=1_000_000)
    parser.add_argument("--segments", type=int, default=10)
    parser.add_argument("--ode-paths", type=int, default=200)
    parser.add_argument("--ode-rtol", type=float, default=1e-10)
    args = parser.parse_args()

    rng = np.random.default_rng(7)
    n_times = args.segments + 1
    ages = np.append(np.sort(rng.uniform(1.0, 120.0, args.segments))[::-1], 0.0)
    temps = rng.uniform(30.0, 160.0, (args.paths, n_times))

    quartz_cement(ages, temps[:1000], **PARAMS)  # warm-up
    t0 = time.perf_counter()
    closed = quartz_cement(ages, temps, **PARAMS)
    t_closed = time.perf_counter() - t0

    area0 = float(walderhaug_surface_area(PARAMS["grain_size_mm"], PARAMS["quartz_fraction"],
                                          PARAMS["coating_fraction"]))
    n_ode = min(args.ode_paths, args.paths)
    t0 = time.perf_counter()
    numeric = np.array([ode_path(ages, temps[i], area0, PARAMS["porosity_onset"],
                                 PARAMS["onset_c"], args.ode_rtol) for i in range(n_ode)])
    t_ode = time.perf_counter() - t0

    rate_closed = args.paths / t_closed
    rate_ode = n_ode / t_ode
    err = np.max(np.abs(closed[:n_ode] - numeric))
    print(f"closed form : {args.paths:>9d} paths x {args.segments} segments in {t_closed:.3f} s"
          f" = {rate_closed:,.0f} paths/s")
    print(f"solve_ivp   : {n_ode:>9d} paths x {args.segments} segments in {t_ode:.3f} s"
          f" = {rate_ode:,.0f} paths/s (rtol {args.ode_rtol:g})")
    print(f"speed ratio : {rate_closed / rate_ode:,.0f}x")
    print(f"max |closed - ODE| on the ODE paths: {err:.2e} (cement fraction)")


if __name__ == "__main__":
    main()
