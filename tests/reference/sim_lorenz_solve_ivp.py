"""Reference trajectory of the Lorenz (1963) system for the simulator's integrator test.

Integrates sigma=10, rho=28, beta=8/3 from (1, 1, 1) over t in [0, 2] with scipy's
solve_ivp (DOP853, rtol 1e-10, atol 1e-12) and stores the state every 0.1 time units in
fixtures/sim_lorenz_solve_ivp.json. Run: /work/pyref/bin/python sim_lorenz_solve_ivp.py
"""
import json
import os

import numpy as np
import scipy
from scipy.integrate import solve_ivp

SIGMA, RHO, BETA = 10.0, 28.0, 8.0 / 3.0


def rhs(_t, s):
    x, y, z = s
    return [SIGMA * (y - x), x * (RHO - z) - y, x * y - BETA * z]


def main():
    t_eval = np.round(np.arange(0.0, 2.0 + 1e-9, 0.1), 10)
    sol = solve_ivp(rhs, (0.0, 2.0), [1.0, 1.0, 1.0], method="DOP853",
                    t_eval=t_eval, rtol=1e-10, atol=1e-12)
    assert sol.success
    out = {
        "source": f"scipy {scipy.__version__} solve_ivp DOP853 rtol=1e-10 atol=1e-12",
        "params": {"sigma": SIGMA, "rho": RHO, "beta": BETA},
        "t": [float(t) for t in sol.t],
        "y": [[float(v) for v in sol.y[:, k]] for k in range(sol.y.shape[1])],
    }
    here = os.path.dirname(os.path.abspath(__file__))
    with open(os.path.join(here, "fixtures", "sim_lorenz_solve_ivp.json"), "w") as f:
        json.dump(out, f, indent=1)
        f.write("\n")


if __name__ == "__main__":
    main()
