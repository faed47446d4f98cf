"""Figures (matplotlib, Agg backend): simulated spectrum with sticks, overlay with a measured spectrum and
its residual, and the pi-orbital energy-level diagram. Each function writes every path it is given
(format from the suffix: .png or .svg)."""
from __future__ import annotations

from pathlib import Path

import matplotlib

matplotlib.use("Agg")
import matplotlib.pyplot as plt  # noqa: E402
import numpy as np  # noqa: E402

from ..units import EV_CM1, HC_EV_NM  # noqa: E402

AXES = ("wavelength", "energy", "wavenumber")
_XLABEL = {"wavelength": "wavelength / nm", "energy": "photon energy / eV", "wavenumber": "wavenumber / cm$^{-1}$"}
_EPS_LABEL = "\u03b5 / M$^{-1}$ cm$^{-1}$"
SIM_COLOUR = "#1f5fa8"
FIT_COLOUR = "#c8452c"
STICK_COLOUR = "#444444"


def to_axis(energy_ev, axis: str):
    """Map photon energies (eV) onto the plotting axis (no Jacobian: eps is not a density)."""
    e = np.asarray(energy_ev, dtype=float)
    if axis == "wavelength":
        return HC_EV_NM / e
    if axis == "wavenumber":
        return e * EV_CM1
    return e


def _save(fig, paths) -> None:
    for p in paths:
        fig.savefig(Path(p), dpi=150 if str(p).lower().endswith(".png") else None)
    plt.close(fig)


def _swatch(ax, colour, text: str, loc: tuple[float, float, float, float]) -> None:
    """A colour swatch in axes coordinates (x, y, w, h) with a caption to its left."""
    sub = ax.inset_axes(loc)
    sub.add_patch(plt.Rectangle((0, 0), 1, 1, facecolor=colour.hex, edgecolor="#555555", lw=0.8))
    sub.set_xlim(0, 1)
    sub.set_ylim(0, 1)
    sub.set_xticks([])
    sub.set_yticks([])
    for s in sub.spines.values():
        s.set_visible(False)
    ax.text(loc[0] - 0.012, loc[1] + loc[3] / 2, text, transform=ax.transAxes, ha="right", va="center", fontsize=8,
            color="#333333")


def _footnote(fig, text: str) -> float:
    """Small wrapped note along the bottom of the figure; returns the height fraction it needs."""
    if not text:
        return 0.0
    import textwrap
    lines = textwrap.wrap(text, 130)
    fig.text(0.01, 0.01, "\n".join(lines), fontsize=7, color="#555555", va="bottom", ha="left")
    return 0.02 + 0.022 * len(lines)


def _secondary_energy_axis(ax, axis: str) -> None:
    """Photon-energy ticks along the top of a wavelength plot, thinned where they would crowd."""
    if axis != "wavelength":
        return
    lo, hi = sorted(ax.get_xlim())
    sec = ax.secondary_xaxis("top", functions=(lambda x: HC_EV_NM / np.maximum(x, 1e-9),
                                               lambda x: HC_EV_NM / np.maximum(x, 1e-9)))
    cands = np.arange(np.floor(HC_EV_NM / hi * 2) / 2, HC_EV_NM / lo + 0.5, 0.5)
    kept, last_nm = [], None
    for ev in cands:  # ascending energy = descending wavelength
        nm = HC_EV_NM / ev if ev > 0 else np.inf
        if not (lo <= nm <= hi):
            continue
        if last_nm is None or last_nm - nm >= 0.06 * (hi - lo):
            kept.append(ev)
            last_nm = nm
    sec.set_xticks(kept)
    sec.set_xticklabels([f"{v:g}" for v in kept])
    sec.set_xlabel("photon energy / eV", fontsize=9)
    sec.tick_params(labelsize=8)


def _eps_scale(ymax: float) -> tuple[float, str]:
    """Power-of-ten divisor for the eps axis and its label, e.g. (1e4, 'eps / 10^4 M^-1 cm^-1')."""
    p = int(np.floor(np.log10(ymax))) if ymax > 0 else 0
    if p <= 2:
        return 1.0, _EPS_LABEL
    return 10.0 ** p, f"\u03b5 / 10$^{{{p}}}$ M$^{{-1}}$ cm$^{{-1}}$"


def _label_levels(xs: np.ndarray, span: float, min_sep: float = 0.12) -> list[int]:
    """Stacking level for each label so that labels closer than ``min_sep`` of the axis span differ."""
    levels = [0] * len(xs)
    placed: list[tuple[float, int]] = []
    for k in np.argsort(xs):
        lvl = 0
        while any(abs(xs[k] - x) < min_sep * span and l == lvl for x, l in placed):
            lvl += 1
        levels[k] = lvl
        placed.append((xs[k], lvl))
    return levels


def plot_spectrum(curve, sticks, paths, axis: str = "wavelength", window=None, title: str = "",
                  colour=None, colour_text: str = "", label_min_f: float = 0.05, max_labels: int = 6,
                  subtitle: str = "") -> None:
    """Curve (eps) with the sticks (f, right axis) under it, bright bands labelled, optional swatch.

    window : (lo, hi) in axis units; None shows the whole curve.
    """
    fig, ax = plt.subplots(figsize=(8.0, 4.8))
    x = to_axis(curve.energy_ev, axis)
    lo, hi = (float(np.min(x)), float(np.max(x))) if window is None else (min(window), max(window))
    ymax = float(np.max(curve.epsilon[(x >= lo) & (x <= hi)], initial=0.0)) or 1.0
    div, ylabel = _eps_scale(ymax)
    ax.plot(x, curve.epsilon / div, color=SIM_COLOUR, lw=1.8, label="simulated \u03b5", zorder=3)
    ax.fill_between(x, curve.epsilon / div, color=SIM_COLOUR, alpha=0.08, lw=0, zorder=2)
    ax.set_xlabel(_XLABEL[axis])
    ax.set_ylabel(ylabel)
    ax.set_xlim(lo, hi)
    ax.set_ylim(0, ymax / div * 1.28)
    ax2 = ax.twinx()
    xs = to_axis(sticks.energy_ev, axis)
    inside = (xs >= lo) & (xs <= hi)
    fmax = float(np.max(sticks.f[inside], initial=0.0)) or 1.0
    ax2.vlines(xs[inside], 0, sticks.f[inside], color=STICK_COLOUR, lw=1.6, zorder=4)
    ax2.plot(xs[inside], sticks.f[inside], "o", ms=3, color=STICK_COLOUR, zorder=4)
    ax2.set_ylim(0, fmax * 1.28 * 1.6)  # sticks stay in the lower ~60 % so the curve reads above them
    ax2.set_ylabel("oscillator strength f", color=STICK_COLOUR)
    ax2.tick_params(axis="y", colors=STICK_COLOUR)
    # labels for the brightest bands inside the window
    order = [k for k in np.argsort(-sticks.f) if inside[k] and sticks.f[k] >= label_min_f * fmax][:max_labels]
    levels = _label_levels(xs[order], hi - lo)
    for k, lvl in zip(order, levels):
        nm = HC_EV_NM / sticks.energy_ev[k]
        ax2.annotate(f"{sticks.labels[k]} {nm:.0f} nm\nf = {sticks.f[k]:.2f}", (xs[k], sticks.f[k]),
                     xytext=(0, 4 + 27 * lvl), textcoords="offset points", ha="center", va="bottom",
                     fontsize=7.5, color="#222222", zorder=5,
                     bbox=dict(boxstyle="round,pad=0.15", fc="white", ec="none", alpha=0.8),
                     arrowprops=dict(arrowstyle="-", color="#999999", lw=0.5) if lvl else None)
    _secondary_energy_axis(ax, axis)
    if colour is not None:
        _swatch(ax, colour, colour_text, (0.87, 0.78, 0.11, 0.16))
    ax.set_title(title, fontsize=11, loc="left", pad=24 if axis == "wavelength" else 6)
    ax.grid(alpha=0.25, lw=0.5)
    bottom = _footnote(fig, subtitle)
    fig.tight_layout(rect=(0, bottom, 1, 1))
    _save(fig, paths)


def plot_overlay(curves, names, colours, paths, axis: str = "wavelength", window=None, title: str = "",
                 subtitle: str = "") -> None:
    """Several simulated curves (eps) over each other, a colour swatch of each solution in the legend.

    curves, names, colours : one each per molecule (colours: :class:`PerceivedColour`); window : (lo, hi)
    in axis units.
    """
    from matplotlib.patches import Patch

    fig, ax = plt.subplots(figsize=(8.0, 4.8))
    xs = [to_axis(c.energy_ev, axis) for c in curves]
    lo, hi = (float(min(np.min(x) for x in xs)), float(max(np.max(x) for x in xs))) if window is None \
        else (min(window), max(window))
    ymax = max(float(np.max(c.epsilon[(x >= lo) & (x <= hi)], initial=0.0)) for c, x in zip(curves, xs)) or 1.0
    div, ylabel = _eps_scale(ymax)
    cycle = plt.rcParams["axes.prop_cycle"].by_key().get("color", [SIM_COLOUR])
    lines, swatches = [], []
    for k, (c, x, col) in enumerate(zip(curves, xs, colours)):
        line, = ax.plot(x, c.epsilon / div, color=cycle[k % len(cycle)], lw=1.6, zorder=3,
                        ls=("-", "--", ":", "-.")[(k // len(cycle)) % 4])
        lines.append(line)
        swatches.append(Patch(facecolor=col.hex, edgecolor="#555555", lw=0.6))
    # two legend columns filled column by column: each molecule's line, and beside it its solution colour
    ax.legend(handles=lines + swatches, labels=list(names) + [f"solution {c.hex}" for c in colours],
              fontsize=7.5, ncol=2, loc="upper right", frameon=False)
    ax.set_xlabel(_XLABEL[axis])
    ax.set_ylabel(ylabel)
    ax.set_xlim(lo, hi)
    ax.set_ylim(0, ymax / div * (1.25 + 0.09 * len(curves)))
    _secondary_energy_axis(ax, axis)
    ax.set_title(title, fontsize=11, loc="left", pad=24 if axis == "wavelength" else 6)
    ax.grid(alpha=0.25, lw=0.5)
    bottom = _footnote(fig, subtitle)
    fig.tight_layout(rect=(0, bottom, 1, 1))
    _save(fig, paths)


def plot_compare(meas, sim_raw, sim_fit, fit, paths, axis: str = "wavelength", title: str = "",
                 colours=(), subtitle: str = "") -> None:
    """Measured points, unshifted and fitted simulation, residual panel, fit box and swatches.

    sim_raw, sim_fit : model values at the measured energies (measured units)
    colours : sequence of (PerceivedColour, caption) pairs
    """
    fig, (ax, axr) = plt.subplots(2, 1, figsize=(8.0, 6.0), sharex=True, gridspec_kw={"height_ratios": [3.2, 1]})
    x = to_axis(meas.energy_ev, axis)
    ax.plot(x, meas.values, color="black", lw=1.0, label="measured", zorder=4)
    ax.plot(x, sim_raw, color=SIM_COLOUR, lw=1.2, ls="--", alpha=0.8, label="computed (scaled only)", zorder=3)
    ax.plot(x, sim_fit, color=FIT_COLOUR, lw=1.8, label="computed, fitted", zorder=5)
    ax.set_ylabel(meas.unit_label)
    ymax = float(np.max([np.max(meas.values), np.max(sim_fit), np.max(sim_raw)]))
    ax.set_ylim(min(0.0, float(np.min(meas.values))) * 1.1, ymax * 1.3)
    ax.grid(alpha=0.25, lw=0.5)
    if fit.window_ev[0] > meas.energy_ev[0] + 1e-9 or fit.window_ev[1] < meas.energy_ev[-1] - 1e-9:
        ax.axvspan(*sorted(to_axis(np.array(fit.window_ev), axis)), color="#eeeeee", zorder=0, label="fit window")
    ax.legend(loc="upper left", fontsize=8, frameon=False)
    txt = (f"shift {fit.shift_ev:+.3f} \u00b1 {fit.shift_err:.3f} eV ({fit.shift_cm1:+.0f} cm$^{{-1}}$)\n"
           f"scale {fit.scale:.3g} \u00b1 {fit.scale_err:.2g}\n"
           f"FWHM {fit.fwhm_ev:.3f} \u00b1 {fit.fwhm_err:.3f} eV\n"
           f"similarity r {fit.before.pearson:.3f} \u2192 {fit.after.pearson:.3f}")
    if fit.at_bounds:
        txt += f"\nWARNING: fit at the limit of {' and '.join(fit.at_bounds)}"
    ax.text(0.985, 0.97, txt, transform=ax.transAxes, ha="right", va="top", fontsize=8,
            bbox=dict(boxstyle="round,pad=0.4", fc="white", ec="#bbbbbb", lw=0.6), zorder=6)
    for k, (col, cap) in enumerate(colours):
        _swatch(ax, col, cap, (0.90, 0.45 - 0.17 * k, 0.085, 0.13))
    resid = np.asarray(meas.values) - np.asarray(sim_fit)
    axr.plot(x, resid, color="#555555", lw=0.9)
    axr.axhline(0, color="black", lw=0.6)
    axr.set_ylabel("residual", fontsize=9)
    axr.set_xlabel(_XLABEL[axis])
    axr.grid(alpha=0.25, lw=0.5)
    axr.set_xlim(float(np.min(x)), float(np.max(x)))
    _secondary_energy_axis(ax, axis)
    ax.set_title(title, fontsize=11, loc="left", pad=24 if axis == "wavelength" else 6)
    bottom = _footnote(fig, subtitle)
    fig.tight_layout(rect=(0, bottom, 1, 1))
    _save(fig, paths)


def plot_levels(mo_energy, n_occ: int, classes, reference_ev: float, reference_text: str, paths,
                title: str = "", degenerate_tol_ev: float = 1e-3) -> None:
    """pi-orbital energy levels with occupations (arrows), HOMO/LUMO marked, the non-bonding reference
    level dashed, bonding / antibonding regions shaded."""
    e = np.asarray(mo_energy, dtype=float)
    n = len(e)
    fig, ax = plt.subplots(figsize=(5.6, 6.4))
    pad = 0.06 * (e.max() - e.min() + 1.0)
    lo, hi = min(e.min(), reference_ev) - pad, max(e.max(), reference_ev) + pad
    ax.axhspan(lo, reference_ev, color="#e8f0fb", zorder=0)
    ax.axhspan(reference_ev, hi, color="#fbeceb", zorder=0)
    ax.axhline(reference_ev, color="#666666", ls="--", lw=1.0, zorder=1)
    ax.text(0.02, reference_ev, reference_text, transform=ax.get_yaxis_transform(), va="bottom", ha="left",
            fontsize=8, color="#333333", bbox=dict(boxstyle="round,pad=0.2", fc="white", ec="none", alpha=0.7))
    ax.text(0.98, lo + 0.3 * pad, "bonding", transform=ax.get_yaxis_transform(), ha="right", va="bottom",
            fontsize=9, color="#1f5fa8")
    ax.text(0.98, hi - 0.3 * pad, "antibonding", transform=ax.get_yaxis_transform(), ha="right", va="top",
            fontsize=9, color="#a83a2a")
    # levels closer than 3 % of the plotted range (degenerate or nearly so) are set side by side, each
    # still at its own energy, so that none hides another
    close = 0.03 * (hi - lo)
    groups, k = [], 0
    while k < n:
        j = k + 1
        while j < n and e[j] - e[j - 1] < max(close, degenerate_tol_ev):
            j += 1
        groups.append(list(range(k, j)))
        k = j
    width, gap = 0.5, 0.12
    for grp in groups:
        m = len(grp)
        total = m * width + (m - 1) * gap
        for pos, p in enumerate(grp):
            x0 = 1.5 - total / 2 + pos * (width + gap)
            col = {"bonding": "#1f5fa8", "antibonding": "#a83a2a"}.get(classes[p], "#333333")
            ax.plot([x0, x0 + width], [e[p], e[p]], color=col, lw=2.2, solid_capstyle="butt", zorder=3)
            if p < n_occ:
                for dx, sym in ((0.34, "\u2191"), (0.66, "\u2193")):
                    ax.text(x0 + dx * width, e[p], sym, ha="center", va="center", fontsize=11, zorder=4)
            if p in (n_occ - 1, n_occ):
                lab = "HOMO" if p == n_occ - 1 else "LUMO"
                ax.annotate(f"{lab}  {e[p]:.2f} eV", (1.5 + total / 2, e[p]), xytext=(10, 0),
                            textcoords="offset points", va="center", fontsize=9, fontweight="bold")
    ax.set_xlim(0, 3.6)
    ax.set_ylim(lo, hi)
    ax.set_xticks([])
    ax.set_ylabel("orbital energy / eV")
    ax.set_title(title, fontsize=10, loc="left")
    fig.legend(handles=mpatch_legend(), loc="lower center", ncol=2, fontsize=7.5, frameon=False)
    fig.tight_layout(rect=(0, 0.08, 1, 1))
    _save(fig, paths)


def mpatch_legend():
    from matplotlib.lines import Line2D
    return [Line2D([0], [0], color="#1f5fa8", lw=2.2, label="bonding (below reference)"),
            Line2D([0], [0], color="#333333", lw=2.2, label="non-bonding (within 0.1 eV)"),
            Line2D([0], [0], color="#a83a2a", lw=2.2, label="antibonding (above reference)"),
            Line2D([0], [0], color="none", marker="$\u2191\u2193$", markersize=10, markeredgecolor="black",
                   label="2 electrons (occupied)")]
