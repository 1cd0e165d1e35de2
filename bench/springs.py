"""A second benchmark system: n masses in a line joined by springs and dampers.

Mass i (1..n) moves along x_i (m, from its unloaded position, positive away
from the wall); spring k_i and damper c_i join mass i to mass i − 1 (mass 0 is
the wall).  A harmonic force F0 sin(Ω t) drives the last mass.  Parameter
values are invented.
"""

from __future__ import annotations


def _stretch(i: int) -> str:
    return f"x{i}" if i == 1 else f"(x{i} - x{i - 1})"


def _rate(i: int) -> str:
    return f"dot(x{i})" if i == 1 else f"(dot(x{i}) - dot(x{i - 1}))"


def calc_toml(n: int, number: str, *, scale: float = 1.0) -> str:
    """Calc-file text with time history, frequency response, one output and one result.

    `scale` varies the masses so that calcs of a project differ.
    """
    coords = range(1, n + 1)
    lines = [
        "[calc]", f'number = "{number}"', f'title = "Benchmark: {n}-mass spring chain"',
        'purpose = "Generated benchmark calc (invented data): masses in a line on springs."',
        "", "[parameters]",
        'F0 = { value = "40 N", note = "force amplitude on the last mass" }',
        'Omega = { value = "9 rad/s", note = "forcing frequency" }',
    ]
    lines += [f'm{i} = "{round(scale * (2.0 + 0.5 * i), 3)} kg"' for i in coords]
    lines += [f'k{i} = "{1500 - 100 * i} N/m"' for i in coords]
    lines += [f'c{i} = "{2 + i} N*s/m"' for i in coords]
    lines += ["", "[coordinates]"]
    lines += [f'x{i} = {{ unit = "mm", label = "displacement of mass {i}" }}' for i in coords]
    lines += ["", "[energy]",
              'kinetic = "' + " + ".join(f"m{i}/2*dot(x{i})**2" for i in coords) + '"',
              'potential = "' + " + ".join(f"k{i}/2*{_stretch(i)}**2" for i in coords) + '"',
              'dissipation = "' + " + ".join(f"c{i}/2*{_rate(i)}**2" for i in coords) + '"',
              "", "[generalized_forces]", f'x{n} = "F0*sin(Omega*t)"',
              "", "[initial]"]
    lines += [f'x{i} = "0 mm"' for i in coords] + [f'"dot(x{i})" = "0 m/s"' for i in coords]
    lines += [
        "", "[time_history]", 'duration = "3 s"', "points = 600",
        "", "[frequency_response]", f'force = {{ x{n} = "F0" }}', 'from = "0.2 Hz"', 'to = "8 Hz"',
        "points = 200",
        "", "[[output]]", 'name = "s_last"', f'expr = "{_stretch(n)}"', 'unit = "mm"',
        'label = "stretch of the last spring"',
        "", "[[result]]", 'name = "f1"', 'expr = "natural_frequency(1)"', 'unit = "Hz"',
        'label = "first natural frequency"',
    ]
    return "\n".join(lines) + "\n"
