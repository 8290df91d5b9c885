"""Pictures of results (matplotlib, the optional extra ``[plot]``): drawing only, no numerics.

Each function returns a matplotlib Figure; :func:`figure_bytes` renders it as PNG or SVG.  Every
figure has axis labels with units and a caption naming the model (:data:`MODEL`).  The data come
from the result file (JSON objects) or from :mod:`tdhf.pictures` (recomputed functions).

Without matplotlib, :func:`require_matplotlib` raises an InputError whose one line names the
command that installs it.
"""

from __future__ import annotations

import io
import math
from typing import TYPE_CHECKING, Any, Mapping, Sequence

from tdhf.errors import InputError

if TYPE_CHECKING:  # annotations only: this module draws what the layers below computed
    from tdhf.pictures import RadialPlot, RealAxisPlot

__all__ = ["MODEL", "INSTALL_HINT", "require_matplotlib", "real_axis_figure", "imaginary_axis_figure",
           "spectrum_figure", "cross_section_figure", "radial_figure", "deviation_figure", "figure_bytes", "FORMATS"]

#: What every caption says the numbers are.
MODEL = "TDHF/RPA linear response of nonrelativistic Hartree-Fock (point nucleus, numerical radial grid)"
INSTALL_HINT = "pip install 'tdhf[plot]'"
#: Image formats by file suffix.
FORMATS = ("png", "svg")
_NAMES = {1: "dipole", 2: "quadrupole", 3: "octupole"}


def require_matplotlib():
    """The pyplot module with a file-only backend, or InputError naming the install command."""
    try:
        import matplotlib
    except ImportError:
        raise InputError(f"plots need matplotlib, which is not installed; install it with: {INSTALL_HINT}") from None
    matplotlib.use("Agg")  # files only: never open a window
    import matplotlib.pyplot as pyplot

    return pyplot


def _figure(rows: int = 1, columns: int = 1, width: float = 7.0, height: float = 4.5):
    pyplot = require_matplotlib()
    figure, axes = pyplot.subplots(rows, columns, figsize=(width, height), squeeze=False)
    return figure, axes


def _caption(figure, text: str) -> None:
    figure.text(0.01, 0.01, f"{text}\n{MODEL}", fontsize=7, va="bottom", ha="left", color="0.3")
    figure.tight_layout(rect=(0, 0.08, 1, 1))


def figure_bytes(figure, format: str, close: bool = True) -> bytes:
    """The figure rendered as ``format`` ("png" or "svg"); closed afterwards unless ``close`` is False."""
    pyplot = require_matplotlib()
    buffer = io.BytesIO()
    try:
        figure.savefig(buffer, format=format, dpi=150)
    finally:
        if close:
            pyplot.close(figure)
    return buffer.getvalue()


def real_axis_figure(plot: "RealAxisPlot", caption: str):
    """alpha_L(omega) between the poles (dashed lines), the continuum above the threshold shaded."""
    figure, axes = _figure()
    ax = axes[0, 0]
    finite = [abs(y) for segment in plot.segments for y in segment.y if math.isfinite(y)]
    static = abs(plot.segments[0].y[0]) if plot.segments and plot.segments[0].y else 1.0
    for number, segment in enumerate(plot.segments):
        ax.plot(segment.x, segment.y, color="C0", lw=1.2, label="alpha(omega), this grid" if number == 0 else None)
    if plot.points.x:
        ax.plot(plot.points.x, plot.points.y, "o", color="C3", ms=5, label="values in the result file")
    for number, pole in enumerate(plot.poles):
        ax.axvline(pole, color="0.5", ls="--", lw=0.7, label="poles (RPA lines)" if number == 0 else None)
    top = plot.threshold * 1.08
    ax.axvspan(plot.threshold, top, color="C1", alpha=0.2, label="continuum (above -eps_HOMO)")
    limit = min(max(finite, default=1.0), 8.0 * static) * 1.1
    ax.set_ylim(-limit, limit)
    ax.set_xlim(0.0, top)
    unit = f"bohr^{2 * plot.multipole + 1}"
    ax.set_xlabel("frequency omega (hartree)")
    ax.set_ylabel(f"alpha_{plot.multipole}(omega) ({unit})")
    ax.set_title(f"{plot.system}: {_NAMES.get(plot.multipole, '')} polarizability on the real axis")
    ax.axhline(0.0, color="0.8", lw=0.6)
    ax.legend(fontsize=7, loc="upper left")
    _caption(figure, caption)
    return figure


def imaginary_axis_figure(tables: Sequence[Mapping[str, Any]], caption: str):
    """alpha_L(i omega) of each system of a dispersion table, log-log (one panel per multipole)."""
    figure, axes = _figure(1, 3, width=11.0, height=4.0)
    for panel, (key, multipole) in enumerate((("dipole", 1), ("quadrupole", 2), ("octupole", 3))):
        ax = axes[0, panel]
        for table in tables:
            pairs = [(w, a) for w, a in zip(table["frequencies"], table[key]) if a is not None and a > 0.0]
            if pairs:
                ax.loglog(*zip(*pairs), marker=".", ms=3, lw=1.0, label=table["system"])
        ax.set_xlabel("imaginary frequency omega (hartree)")
        ax.set_ylabel(f"alpha_{multipole}(i omega) (bohr^{2 * multipole + 1})")
        ax.set_title(f"{key} (quadrature nodes)", fontsize=9)
        ax.legend(fontsize=7)
    _caption(figure, caption)
    return figure


def spectrum_figure(excitations: Sequence[Mapping[str, Any]], distributions: Sequence[Mapping[str, Any]],
                    caption: str):
    """The bound lines as sticks (one panel per multipole) with the S(0) split in the legend."""
    multipoles = sorted({row["multipole"] for row in excitations} | {row["multipole"] for row in distributions})
    figure, axes = _figure(1, len(multipoles), width=5.0 * len(multipoles), height=4.0)
    for panel, multipole in enumerate(multipoles):
        ax = axes[0, panel]
        lines = [row for row in excitations if row["multipole"] == multipole]
        if lines:
            ax.vlines([row["energy"] for row in lines], 0.0, [row["oscillator_strength"] for row in lines],
                      color="C0", lw=2.0, label="bound lines")
        split = next((row for row in distributions if row["multipole"] == multipole), None)
        if split is not None:
            ax.axvline(split["continuum_threshold"], color="C1", ls="--", lw=1.0,
                       label=f"threshold {split['continuum_threshold']:.5f} hartree")
            ax.plot([], [], " ", label=f"S(0) = {split['total']:.6g}")
            ax.plot([], [], " ", label=f"below threshold {split['discrete_sum']:.4g} ({split['discrete_states']} roots)")
            ax.plot([], [], " ", label=f"continuum {split['continuum_sum']:.4g}")
        unit = "" if multipole == 1 else f" (bohr^{2 * multipole - 2})"
        ax.set_xlabel("excitation energy (hartree)")
        ax.set_ylabel(f"oscillator strength f{unit}")
        ax.set_ylim(bottom=0.0)
        ax.set_title(f"L = {multipole} ({_NAMES.get(multipole, '')}) RPA lines", fontsize=9)
        ax.legend(fontsize=6, loc="best")
    _caption(figure, caption)
    return figure


def cross_section_figure(rows: Sequence[Mapping[str, Any]], thresholds: Sequence[Mapping[str, Any]],
                         resonances: Sequence[Mapping[str, Any]], caption: str):
    """sigma(omega) in Mb against the photon energy in eV: TDHF length and velocity forms, uncoupled,
    the partial cross sections of each hole, the thresholds (dotted) and resonances (ticks)."""
    from tdhf.constants import BOHR2_MEGABARN, HARTREE_EV

    figure, axes = _figure(width=8.0, height=5.0)
    ax = axes[0, 0]
    rows = sorted(rows, key=lambda row: row["photon_energy"])
    energies = [row["photon_energy"] * HARTREE_EV for row in rows]

    def megabarn(key: str) -> list[float]:
        return [row[key] * BOHR2_MEGABARN if row[key] is not None else math.nan for row in rows]

    ax.plot(energies, megabarn("cross_section"), color="C0", lw=1.6, label="TDHF (RPA), length form")
    ax.plot(energies, megabarn("cross_section_velocity"), color="C0", lw=0.8, ls="--", label="TDHF, velocity form")
    ax.plot(energies, megabarn("cross_section_uncoupled"), color="0.5", lw=1.0, ls=":", label="uncoupled (V^N)")
    holes = sorted({partial["subshell"] for row in rows for partial in row["partial"]})
    for k, hole in enumerate(holes):
        values = [next((p["cross_section"] * BOHR2_MEGABARN for p in row["partial"] if p["subshell"] == hole), math.nan)
                  for row in rows]
        ax.plot(energies, values, color=f"C{k + 1}", lw=0.9, label=f"partial, {hole} hole")
    low, high = (min(energies), max(energies)) if energies else (0.0, 1.0)
    for threshold in thresholds:
        energy = threshold["energy"] * HARTREE_EV
        if low <= energy <= high:
            ax.axvline(energy, color="0.6", ls=":", lw=0.8)
            ax.text(energy, 1.0, f" {threshold['subshell']}", transform=ax.get_xaxis_transform(), fontsize=7,
                    va="top", color="0.4")
    for resonance in resonances:
        ax.axvline(resonance["energy"] * HARTREE_EV, ymax=0.05, color="C3", lw=1.0)
    ax.set_xlabel("photon energy (eV)")
    ax.set_ylabel("photoionization cross section (Mb)")
    ax.set_ylim(bottom=0.0)
    ax.legend(fontsize=7)
    _caption(figure, caption + "; thresholds dotted (Koopmans), resonances as red ticks")
    return figure


def radial_figure(plot: "RadialPlot", caption: str, log_r: bool = True):
    """Functions of r (one curve per subshell or channel), r on a log axis."""
    figure, axes = _figure()
    ax = axes[0, 0]
    for number, curve in enumerate(plot.curves):
        ax.plot(curve.x, curve.y, lw=1.6 if curve.label == "total" else 1.0,
                color="k" if curve.label == "total" else f"C{number % 10}", label=curve.label)
    if log_r:
        ax.set_xscale("log")
    ax.set_xlabel("r (bohr)")
    ax.set_ylabel(plot.quantity)
    ax.set_title(plot.title, fontsize=10)
    ax.axhline(0.0, color="0.8", lw=0.6)
    ax.legend(fontsize=7, ncol=2)
    _caption(figure, caption)
    return figure


def deviation_figure(rows: Sequence[Any], caption: str):
    """|relative deviation| per property (x) and label (marker colour), log scale."""
    figure, axes = _figure(width=8.0)
    ax = axes[0, 0]
    usable = [row for row in rows if row.status == "ok" and row.relative_deviation]
    properties = list(dict.fromkeys(row.property for row in usable))
    labels = list(dict.fromkeys(row.label for row in usable))
    for number, label in enumerate(labels):
        mine = [row for row in usable if row.label == label]
        offset = (number - (len(labels) - 1) / 2) * 0.8 / max(len(labels), 1)
        ax.semilogy([properties.index(row.property) + offset for row in mine],
                    [abs(row.relative_deviation) for row in mine], "o", ms=5, label=label)
    ax.set_xticks(range(len(properties)))
    ax.set_xticklabels(properties, rotation=20, ha="right", fontsize=8)
    ax.set_ylabel("|value - reference| / |reference| (1)")
    ax.set_title("Deviation from the numerical limit")
    if labels:
        ax.legend(fontsize=7)
    _caption(figure, caption)
    return figure
