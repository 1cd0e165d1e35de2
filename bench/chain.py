"""The benchmark system: an n-link planar pendulum chain in absolute angles.

Link i (1..n) is massless, of length L_i, with a point mass m_i at its end;
θ_i is measured from the downward vertical, positive anticlockwise; gravity g
acts downward.  Mass i sits at
    x_i = Σ_{k≤i} L_k sin θ_k,   y_i = −Σ_{k≤i} L_k cos θ_k.

The same chain is written three ways: as a calc file, as a
sympy.physics.mechanics model (frames, points, particles, gravity as loads),
and as a hand-written numpy right-hand side (closed-form M and f).  The calc
file states T in one of two forms:

- "cartesian": T = Σ m_i/2 (ẋ_i² + ẏ_i²) with ẋ_i, ẏ_i written out from the
  positions (the same information the mechanics model starts from);
- "pairs": T = Σ_j μ_j/2 L_j² θ̇_j² + Σ_{j<k} μ_k L_j L_k cos(θ_j − θ_k) θ̇_j θ̇_k,
  μ_k = Σ_{i≥k} m_i given as parameters (the textbook form, worked by hand).

Parameter values are invented.
"""

from __future__ import annotations

import numpy as np

G = 9.80665


def masses(n: int) -> list[float]:
    """m_i in kg."""
    return [1.0 + 0.25 * i for i in range(n)][::-1]


def lengths(n: int) -> list[float]:
    """L_i in m."""
    return [0.6 - 0.03 * i for i in range(n)]


def _velocity_terms(i: int) -> tuple[str, str]:
    """ẋ_i and ẏ_i of mass i (1-based) as calc-file expressions."""
    vx = " + ".join(f"L{k}*cos(th{k})*dot(th{k})" for k in range(1, i + 1))
    vy = " + ".join(f"L{k}*sin(th{k})*dot(th{k})" for k in range(1, i + 1))
    return vx, vy


def kinetic_text(n: int) -> str:
    parts = []
    for i in range(1, n + 1):
        vx, vy = _velocity_terms(i)
        parts.append(f"m{i}/2*(({vx})**2 + ({vy})**2)")
    return " + ".join(parts)


def pairs_kinetic_text(n: int) -> str:
    parts = [f"mu{j}/2*L{j}**2*dot(th{j})**2" for j in range(1, n + 1)]
    parts += [f"mu{k}*L{j}*L{k}*cos(th{j} - th{k})*dot(th{j})*dot(th{k})"
              for j in range(1, n + 1) for k in range(j + 1, n + 1)]
    return " + ".join(parts)


def pairs_potential_text(n: int) -> str:
    return "-g*(" + " + ".join(f"mu{j}*L{j}*cos(th{j})" for j in range(1, n + 1)) + ")"


def tail_masses(n: int) -> list[float]:
    """μ_k = Σ_{i≥k} m_i in kg."""
    m = masses(n)
    return [sum(m[k:]) for k in range(n)]


def potential_text(n: int) -> str:
    parts = []
    for i in range(1, n + 1):
        height = " + ".join(f"L{k}*cos(th{k})" for k in range(1, i + 1))
        parts.append(f"m{i}*g*({height})")
    return "-(" + " + ".join(parts) + ")"


def calc_toml(n: int, number: str = "B-1", *, form: str = "cartesian", analyses: bool = False,
              amplitude_rad: float = 0.2) -> str:
    """Calc-file text of the n-link chain; `analyses` adds time history, FRF and an output."""
    if form == "pairs":
        masses_lines = [f'mu{k} = {{ value = "{mu:g} kg", note = "mass carried by link {k}" }}'
                        for k, mu in enumerate(tail_masses(n), start=1)]
        energy = [f'kinetic = "{pairs_kinetic_text(n)}"', f'potential = "{pairs_potential_text(n)}"']
    else:
        masses_lines = [f'm{i} = "{m:g} kg"' for i, m in enumerate(masses(n), start=1)]
        energy = [f'kinetic = "{kinetic_text(n)}"', f'potential = "{potential_text(n)}"']
    lines = [
        "[calc]",
        f'number = "{number}"',
        f'title = "Benchmark: {n}-link planar pendulum chain"',
        'purpose = "Generated benchmark calc (invented data): point masses on massless links."',
        "",
        "[parameters]",
        f'g = "{G} m/s^2"',
    ]
    lines += masses_lines
    lines += [f'L{i} = "{L:.2f} m"' for i, L in enumerate(lengths(n), start=1)]
    lines += ["", "[coordinates]"]
    lines += [f'th{i} = {{ unit = "rad", label = "angle of link {i} from the downward vertical" }}'
              for i in range(1, n + 1)]
    lines += ["", "[energy]", *energy, "", "[initial]"]
    lines += [f'th{i} = "{amplitude_rad if i == 1 else 0.0} rad"' for i in range(1, n + 1)]
    lines += [f'"dot(th{i})" = "0 rad/s"' for i in range(1, n + 1)]
    if analyses:
        lines += _analysis_tables(n)
    return "\n".join(lines) + "\n"


def _analysis_tables(n: int) -> list[str]:
    tip = " + ".join(f"L{k}*sin(th{k})" for k in range(1, n + 1))
    return [
        "", "[time_history]", 'duration = "2 s"', "points = 400",
        "", "[frequency_response]", 'force = { th1 = "1 N*m" }', 'from = "0.05 Hz"',
        'to = "5 Hz"', "points = 200",
        "", "[[output]]", 'name = "x_tip"', f'expr = "{tip}"', 'unit = "mm"',
        'label = "horizontal position of the last mass"',
        "", "[[result]]", 'name = "f1"', 'expr = "natural_frequency(1)"', 'unit = "Hz"',
        'label = "first natural frequency"',
    ]


def fit_node_limit(text: str) -> int | None:
    """Raise the loader's node limit (this process only) to fit the energies of calc `text`.

    Returns the limit it replaced, or None when the energies fit already.
    """
    import ast
    import tomllib

    from calcsheaf.calcfile import expressions

    energy = tomllib.loads(text)["energy"]
    largest = max(sum(1 for _ in ast.walk(ast.parse(e, mode="eval"))) for e in energy.values())
    if largest <= expressions.MAX_NODES:
        return None
    old, expressions.MAX_NODES = expressions.MAX_NODES, largest
    return old


def parameter_values(n: int) -> dict[str, float]:
    values = {"g": G}
    values.update({f"m{i}": m for i, m in enumerate(masses(n), start=1)})
    values.update({f"L{i}": round(L, 2) for i, L in enumerate(lengths(n), start=1)})
    return values


def numpy_rhs(n: int):
    """Hand-written numpy RHS y' = [θ̇, M⁻¹ f] of the chain, y = [θ, θ̇].

    M_jk = μ_jk L_j L_k cos(θ_j − θ_k), μ_jk = Σ_{i ≥ max(j,k)} m_i;
    f_j = −Σ_k μ_jk L_j L_k sin(θ_j − θ_k) θ̇_k² − μ_jj g L_j sin θ_j.
    """
    values = parameter_values(n)
    m = np.array([values[f"m{i}"] for i in range(1, n + 1)])
    L = np.array([values[f"L{i}"] for i in range(1, n + 1)])
    tail = np.cumsum(m[::-1])[::-1]
    index = np.arange(n)
    mu = tail[np.maximum.outer(index, index)]
    mu_LL = mu * np.outer(L, L)
    gravity = G * tail * L

    def rhs(t, y):
        th, w = y[:n], y[n:]
        diff = th[:, None] - th[None, :]
        M = mu_LL * np.cos(diff)
        f = -(mu_LL * np.sin(diff)) @ (w * w) - gravity * np.sin(th)
        return np.concatenate((w, np.linalg.solve(M, f)))

    return rhs


def mechanics_model(n: int):
    """sympy.physics.mechanics pieces of the chain: frame, q, u, frames, points, particles, loads."""
    import sympy as sp
    from sympy.physics import mechanics as me

    q = me.dynamicsymbols(f"th1:{n + 1}")
    u = me.dynamicsymbols(f"w1:{n + 1}")
    m = sp.symbols(f"m1:{n + 1}")
    L = sp.symbols(f"L1:{n + 1}")
    g = sp.Symbol("g")
    N = me.ReferenceFrame("N")
    O = me.Point("O")
    O.set_vel(N, 0)
    frames, points, particles, loads = [], [], [], []
    previous = O
    for i in range(n):
        A = N.orientnew(f"A{i + 1}", "Axis", [q[i], N.z])
        P = previous.locatenew(f"P{i + 1}", -L[i] * A.y)
        frames.append(A)
        points.append(P)
        particles.append(me.Particle(f"B{i + 1}", P, m[i]))
        loads.append((P, -m[i] * g * N.y))
        previous = P
    return {"N": N, "O": O, "q": q, "u": u, "frames": frames, "points": points,
            "particles": particles, "loads": loads}
