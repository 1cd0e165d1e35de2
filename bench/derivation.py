"""(a) Derivation time: calcsheaf against LagrangesMethod and KanesMethod.

Every measurement runs in its own fresh interpreter (so sympy's cache holds
nothing from another method) and times only the derivation, not the imports.
Run as a script it is that worker: `derivation.py TOOL N` prints the seconds.

- calcsheaf: `lagrange.derive(spec)` on the spec `load_calc` made from the
  generated calc file (loading is timed apart and reported beside it), for
  both forms of T (see chain.py).  When T has more syntax-tree nodes than the
  loader's limit (`expressions.MAX_NODES`), the limit is raised for that run
  only and the run says so (`node_limit_raised`);
- LagrangesMethod: velocities of the points, the Lagrangian, then
  `form_lagranges_equations()`, `mass_matrix_full` and `forcing_full`;
- KanesMethod: velocities, `kanes_equations(particles, loads)`, then
  `mass_matrix_full` and `forcing_full`.
"""

from __future__ import annotations

import json
import subprocess
import sys
import tempfile
import time
from pathlib import Path

HERE = Path(__file__).resolve().parent


def time_calcsheaf(n: int, form: str = "cartesian") -> dict:
    from calcsheaf.calcfile.loader import load_calc
    from calcsheaf.mechanics.lagrange import derive

    import chain

    text = chain.calc_toml(n, form=form)
    old_limit = chain.fit_node_limit(text)
    with tempfile.TemporaryDirectory() as folder:
        path = Path(folder) / "chain.toml"
        path.write_text(text, encoding="utf-8")
        started = time.perf_counter()
        spec = load_calc(path)
        loaded = time.perf_counter()
        derivation = derive(spec)
        done = time.perf_counter()
    assert derivation.M.shape == (n, n)
    return {"seconds": done - loaded, "load_seconds": loaded - started,
            "node_limit_raised": old_limit is not None}


def time_lagrange(n: int) -> dict:
    from sympy.physics import mechanics as me

    import chain

    started = time.perf_counter()
    model = chain.mechanics_model(n)
    N, previous = model["N"], model["O"]
    for A, P in zip(model["frames"], model["points"]):
        P.v2pt_theory(previous, N, A)
        previous = P
    method = me.LagrangesMethod(me.Lagrangian(N, *model["particles"]), model["q"],
                                forcelist=model["loads"], frame=N)
    method.form_lagranges_equations()
    M, f = method.mass_matrix_full, method.forcing_full
    done = time.perf_counter()
    assert M.shape == (2 * n, 2 * n) and f.shape == (2 * n, 1)
    return {"seconds": done - started}


def time_kane(n: int) -> dict:
    from sympy.physics import mechanics as me

    import chain

    started = time.perf_counter()
    model = chain.mechanics_model(n)
    N, previous, q, u = model["N"], model["O"], model["q"], model["u"]
    for i, (A, P) in enumerate(zip(model["frames"], model["points"])):
        A.set_ang_vel(N, u[i] * N.z)
        P.v2pt_theory(previous, N, A)
        previous = P
    kinematics = [qi.diff(me.dynamicsymbols._t) - ui for qi, ui in zip(q, u)]
    method = me.KanesMethod(N, q_ind=q, u_ind=u, kd_eqs=kinematics)
    method.kanes_equations(model["particles"], model["loads"])
    M, f = method.mass_matrix_full, method.forcing_full
    done = time.perf_counter()
    assert M.shape == (2 * n, 2 * n) and f.shape == (2 * n, 1)
    return {"seconds": done - started}


WORKERS = {"calcsheaf": time_calcsheaf, "lagrange": time_lagrange, "kane": time_kane}


def measure(tool: str, n: int, cap_s: float, *extra: str) -> dict:
    """Seconds of one derivation in a fresh process; {"capped": cap_s} when over the cap."""
    try:
        done = subprocess.run([sys.executable, str(Path(__file__)), tool, str(n), *extra],
                              capture_output=True, text=True, timeout=cap_s, check=True)
    except subprocess.TimeoutExpired:
        return {"capped": cap_s}
    except subprocess.CalledProcessError as exc:
        raise RuntimeError(f"{tool} n={n} failed:\n{exc.stderr}") from None
    return json.loads(done.stdout.strip().splitlines()[-1])


def main(argv: list[str]) -> int:
    tool, n, extra = argv[0], int(argv[1]), argv[2:]
    print(json.dumps(WORKERS[tool](n, *extra)))
    return 0


if __name__ == "__main__":
    sys.path.insert(0, str(HERE))
    sys.exit(main(sys.argv[1:]))
