"""Plots as deterministic matplotlib SVG: time histories, energy audit, frequency response.

Every plot labels its axes with units, draws a grid and a legend.  The SVG is
reproducible: Agg backend, fixed `svg.hashsalt`, no date metadata, glyphs as paths.
"""

from __future__ import annotations

import io
from dataclasses import dataclass

import matplotlib

matplotlib.use("Agg")

from matplotlib import rc_context  # noqa: E402
from matplotlib.figure import Figure  # noqa: E402

from calcsheaf.model import EnergyAudit, FrequencyResponse, Series, TimeHistory  # noqa: E402
from calcsheaf.render.symbols import name_latex  # noqa: E402

STYLE = {
    "svg.hashsalt": "calcsheaf",
    "svg.fonttype": "path",
    "font.family": "DejaVu Sans",
    "font.size": 9.0,
    "axes.grid": True,
    "grid.linewidth": 0.5,
    "grid.alpha": 0.6,
    "lines.linewidth": 1.2,
    "path.simplify": True,
    "legend.fontsize": 8.0,
    "legend.framealpha": 0.9,
}
WIDTH_IN = 6.6
HEIGHT_IN = 2.9


@dataclass(frozen=True)
class Plot:
    name: str          # file stem, unique within a calc, e.g. "time-1"
    title: str         # plain text (alt text), e.g. "Time history: z, theta"
    svg: bytes
    symbols: tuple[str, ...] = ()   # calc names plotted, for the caption
    unit: str = ""


def _label(name: str, label: str = "") -> str:
    symbol = f"${name_latex(name)}$"
    return f"{symbol}  {label}" if label else symbol


def _axis_unit(unit: str) -> str:
    return unit if unit else "1"


def _svg(figure: Figure) -> bytes:
    buffer = io.BytesIO()
    with rc_context(STYLE):
        figure.savefig(buffer, format="svg", metadata={"Date": None})
    return buffer.getvalue()


def _figure(rows: int = 1) -> tuple[Figure, list]:
    with rc_context(STYLE):
        figure = Figure(figsize=(WIDTH_IN, HEIGHT_IN * (1 + 0.55 * (rows - 1))),
                        layout="constrained")
        axes = figure.subplots(rows, 1, sharex=True, squeeze=False)[:, 0]
    return figure, list(axes)


def _groups(series: tuple[Series, ...]) -> list[tuple[str, list[Series]]]:
    """Series grouped by unit, in order of first appearance."""
    groups: dict[str, list[Series]] = {}
    for item in series:
        groups.setdefault(item.unit, []).append(item)
    return list(groups.items())


def time_history_plots(history: TimeHistory) -> list[Plot]:
    """One plot per unit of the time-history series (coordinates, rates, outputs)."""
    plots = []
    for index, (unit, members) in enumerate(_groups(history.series), start=1):
        with rc_context(STYLE):
            figure, (axes,) = _figure()
            for item in members:
                axes.plot(history.t, item.values, label=_label(item.name, item.label))
            axes.set_xlabel("time t [s]")
            symbols = ", ".join(f"${name_latex(item.name)}$" for item in members)
            axes.set_ylabel(f"{symbols} [{_axis_unit(unit)}]")
            axes.legend(loc="best")
        names = tuple(item.name for item in members)
        plots.append(Plot(f"time-{index}", f"Time history: {', '.join(names)}", _svg(figure),
                          names, _axis_unit(unit)))
    return plots


def energy_plot(audit: EnergyAudit) -> Plot:
    """Energy function h, energy dissipated and work done (top); balance residual (bottom)."""
    with rc_context(STYLE):
        figure, (top, bottom) = _figure(rows=2)
        top.plot(audit.t, audit.h, label="energy function $h$")
        top.plot(audit.t, audit.dissipated, label="dissipated")
        top.plot(audit.t, audit.work_in, label="work done on the system")
        top.set_ylabel("energy [J]")
        top.legend(loc="best")
        bottom.plot(audit.t, audit.residual, color="black",
                    label="residual $h - h_0$ + dissipated − work")
        bottom.set_ylabel("residual [J]")
        bottom.set_xlabel("time t [s]")
        bottom.legend(loc="best")
    return Plot("energy", "Energy audit", _svg(figure), unit="J")


def frequency_response_plots(response: FrequencyResponse) -> list[Plot]:
    """Amplitude and phase against frequency, one plot per unit."""
    groups: dict[str, list[str]] = {}
    for name in response.amplitude:
        groups.setdefault(response.units.get(name, ""), []).append(name)
    plots = []
    for index, (unit, names) in enumerate(groups.items(), start=1):
        with rc_context(STYLE):
            figure, (amplitude, phase) = _figure(rows=2)
            for name in names:
                amplitude.plot(response.frequency_hz, response.amplitude[name], label=_label(name))
                phase.plot(response.frequency_hz, response.phase_deg[name], label=_label(name))
            if all((response.amplitude[name] > 0).all() for name in names):
                amplitude.set_yscale("log")
            amplitude.set_ylabel(f"amplitude [{_axis_unit(unit)}]")
            amplitude.legend(loc="best")
            phase.set_ylabel("phase [deg]")
            phase.set_xlabel("frequency f [Hz]")
            phase.legend(loc="best")
        plots.append(Plot(f"frf-{index}", f"Frequency response: {', '.join(names)}",
                          _svg(figure), tuple(names), _axis_unit(unit)))
    return plots
