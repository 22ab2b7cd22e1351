"""SVG plots of a study dict: log D against pH, residuals against pH, portions per procedure,
the design-space map, and each calibration curve with its back-calculated errors.

Every plotted value is read from ``StudyReport.to_dict()`` (the ``curve``, ``run_table``,
``procedures`` and ``design_space`` entries); the only arithmetic here is placing things on the
axes. The output is byte-stable: a fixed ``svg.hashsalt``, no date in the metadata, text drawn
as paths, and the object-oriented matplotlib API (no pyplot state).

Speed (``benchmarks/bench_plots.py``): building a Figure and the ticks of its axes costs more
than drawing a study's data on it, so each figure layout is built once per process and emptied
before the next plot (:func:`_canvas`), and the outlines and extents of text are remembered
between figures (:class:`_RememberingTextToPath`). Both leave the SVG byte for byte as a new
Figure draws it (``tests/test_report_plots.py`` checks it).
"""

from __future__ import annotations

import functools
import io
import math
import os
import threading

import matplotlib
import numpy as np
from matplotlib import patheffects
from matplotlib.backends.backend_svg import FigureCanvasSVG
from matplotlib.cm import ScalarMappable
from matplotlib.colors import BoundaryNorm
from matplotlib.figure import Figure
from matplotlib.lines import Line2D
from matplotlib.patches import Patch
from matplotlib.textpath import TextToPath
from matplotlib.ticker import FixedLocator, FuncFormatter, MultipleLocator, NullLocator

from ..formats import fmt_number
from .register import plot_name  # noqa: F401  (named here too; pages import it lightly)

#: The dossier's own palette; hues told apart by lightness as well as colour, and every series
#: also has its own marker shape, so no reading depends on colour alone.
INK = "#22313f"
GRID = "#d9dee4"
CURVE = "#143d66"
BAND = "#7fa7cf"
SERIES = ("#c8541c", "#2274b5", "#d9a21b", "#5b3f8c", "#2f9784", "#8c8c8c")
MARKERS = ("o", "s", "^", "D", "v", "P")
LIMIT = "#a3322b"
#: design-space map: a sequential map made for colour-vision deficiency (dark blue to yellow,
#: lightness rising with recovery); its bands are finer where procedures are judged
MAP_CMAP = "cividis"
MAP_LEVELS = (0.0, 20.0, 40.0, 60.0, 80.0, 90.0, 95.0, 98.0, 99.0, 100.0)
MAP_RATIO_TICKS = (0.05, 0.1, 0.2, 0.5, 1.0, 2.0)
NO_VALUE = "#b8bec6"          # cells whose lower end is open
EXTRAPOLATED = "#8d96a0"      # hatching beyond the measured pH: seen on dark and light bands
HALO = [patheffects.withStroke(linewidth=3.0, foreground="white")]

STYLE = {
    "svg.hashsalt": "extractval-dossier",
    "svg.fonttype": "path",
    "font.family": "DejaVu Sans",
    "font.size": 9.5,
    "axes.titlesize": 10.5,
    "axes.labelsize": 9.5,
    "axes.edgecolor": INK,
    "axes.labelcolor": INK,
    "axes.linewidth": 0.8,
    "axes.spines.top": False,
    "axes.spines.right": False,
    "xtick.color": INK,
    "ytick.color": INK,
    "legend.frameon": False,
    "legend.fontsize": 8.5,
    "lines.linewidth": 1.6,
    "path.simplify": True,
    "hatch.linewidth": 0.7,       # only the map hatches (its extrapolated pH); the hatch takes
                                  # the patch's edge colour
}
WIDTH_IN, HEIGHT_IN = 6.3, 3.4


def _svg(fig: Figure) -> bytes:
    canvas = fig.canvas if isinstance(fig.canvas, FigureCanvasSVG) else FigureCanvasSVG(fig)
    buf = io.BytesIO()
    canvas.print_svg(buf, metadata={"Date": None, "Creator": "extractval"})
    return buf.getvalue()


class _RememberingTextToPath(TextToPath):
    """Text turned into glyph outlines, remembered between figures.

    Text is drawn as paths (``svg.fonttype: path``: no font needed where the SVG is viewed);
    matplotlib lays out every string and measures it anew for each Figure it draws. A string
    in the same font gives the same glyphs, advances and extent every time, so each is
    computed once per process by the methods of the parent class and reused; what the SVG
    gets is unchanged (``tests/test_report_plots.py`` compares the output with and without).
    """

    LIMIT = 20000                   # entries per table; the tables are emptied beyond it

    def __init__(self):
        super().__init__()
        self._fonts: dict = {}
        self._extents: dict = {}
        self._glyphs: dict = {}

    @staticmethod
    def _remember(table: dict, key, compute):
        if key not in table:
            if len(table) >= _RememberingTextToPath.LIMIT:
                table.clear()
            table[key] = compute()
        return table[key]

    def _get_font(self, prop):
        font = self._remember(self._fonts, prop.copy(), lambda: super(
            _RememberingTextToPath, self)._get_font(prop))
        font.set_size(self.FONT_SCALE, self.DPI)     # the font object is shared in matplotlib
        return font

    def get_text_width_height_descent(self, s, prop, ismath):
        return self._remember(self._extents, (s, prop.copy(), ismath), lambda: super(
            _RememberingTextToPath, self).get_text_width_height_descent(s, prop, ismath))

    def get_glyphs_with_font(self, font, s, glyph_map=None, return_new_glyphs_only=False,
                             **kwargs):
        # fonts come from _get_font, always at FONT_SCALE; the font is kept in the value, so
        # its id is not reused by another font while the entry exists
        key = (id(font), font.fname, s, tuple(sorted(kwargs.items())))
        _font, info, paths, rects = self._remember(self._glyphs, key, lambda: (
            font, *super(_RememberingTextToPath, self).get_glyphs_with_font(font, s,
                                                                            **kwargs)))
        if glyph_map is None:
            glyph_map = {}
        new = {} if return_new_glyphs_only else glyph_map
        for glyph, *_ in info:
            if glyph not in glyph_map:
                new[glyph] = paths[glyph]
        return list(info), new, list(rects)


#: shared by every figure drawn here; None draws with matplotlib's own, unremembered
_TEXT_PATHS: TextToPath | None = _RememberingTextToPath()


def _fresh_text_paths_after_fork() -> None:
    """A forked worker starts with its own remembered fonts. The inherited font objects read
    their file through a descriptor whose offset parent and child share, so two processes
    drawing text at once corrupt each other's reads ("failed to load glyph"); matplotlib
    empties its own font cache at a fork for the same reason."""
    global _TEXT_PATHS
    if _TEXT_PATHS is not None:
        _TEXT_PATHS = _RememberingTextToPath()


if hasattr(os, "register_at_fork"):
    os.register_at_fork(after_in_child=_fresh_text_paths_after_fork)


class _Figure(Figure):
    """A Figure whose SVG renderer takes its text outlines from :data:`_TEXT_PATHS`."""

    def draw(self, renderer):
        # the SVG renderer sits inside a MixedModeRenderer; if either attribute is not where
        # this matplotlib keeps it, the text is drawn the ordinary way
        svg = getattr(renderer, "_renderer", renderer)
        if _TEXT_PATHS is not None and type(getattr(svg, "_text2path", None)) is TextToPath:
            svg._text2path = _TEXT_PATHS
        return super().draw(renderer)


def _new_figure(width_in: float, height_in: float) -> Figure:
    """A Figure on an SVG canvas at the SVG's 72 dpi from the start (printing an SVG sets the
    figure to 72 dpi and leaves it there): what is measured while a plot is built, such as the
    gap a contour label cuts into its line, is then measured as the SVG draws it, and alike
    on the first plot of a kept Figure and on the later ones."""
    fig = _Figure(figsize=(width_in, height_in), dpi=72)
    FigureCanvasSVG(fig)
    return fig


#: one Figure per layout, kept for the process; the lock keeps two threads (the preview server)
#: from drawing on one at once, and rcParams are process-wide anyway
_CANVASES: dict[tuple, tuple] = {}
_LOCK = threading.RLock()


def _styled(fn):
    """Run a plot function alone, inside the dossier's rcParams."""
    @functools.wraps(fn)
    def run(*args, **kwargs):
        with _LOCK, matplotlib.rc_context(STYLE):
            return fn(*args, **kwargs)
    return run


def forget_canvases() -> None:
    """Drop the kept figures: the next plot of each layout is drawn on a new Figure."""
    with _LOCK:
        _CANVASES.clear()


def _canvas(key: tuple, build):
    """``build()``'s (figure, axes...) for this layout, those axes emptied of the previous plot.

    Everything a plot adds (lines, collections, patches, texts, images, legends) is removed
    and the data limits are forgotten, so autoscaling sees only the new data; the layout, the
    axes and their tick objects stay. Settings a plot makes (limits, locators, titles) it
    makes every time.
    """
    entry = _CANVASES.get(key)
    if entry is None:
        entry = _CANVASES[key] = build()
        return entry
    fig, *axes = entry
    for legend in list(fig.legends):
        legend.remove()
    for ax in axes:
        for artist in (*ax.collections, *ax.lines, *ax.patches, *ax.texts, *ax.images,
                       *ax.artists, *ax.tables):
            if artist.axes is ax:        # a contour's labels go with the contour
                artist.remove()
        ax.containers.clear()
        if ax.legend_ is not None:
            ax.legend_.remove()
        ax.relim()
        ax.autoscale(True)
    return entry


def _frame(legend_rows: int, log_y: bool = False) -> tuple[Figure, object]:
    fig = _new_figure(WIDTH_IN, HEIGHT_IN + 0.2 * legend_rows)
    # fixed margins (the legend sits above the axes): a layout engine would triple the time
    # per plot for no visible gain
    top = 1.0 - (0.12 + 0.2 * legend_rows) / (HEIGHT_IN + 0.2 * legend_rows)
    fig.subplots_adjust(left=0.11, right=0.97, bottom=0.14, top=top)
    ax = fig.add_subplot()
    ax.grid(True, color=GRID, linewidth=0.6)
    ax.set_axisbelow(True)
    if log_y:
        ax.set_yscale("log")
        ax.yaxis.set_minor_locator(NullLocator())
        ax.yaxis.set_major_formatter(FuncFormatter(_power_of_ten))
    return fig, ax


def _figure(kind: str, legend_rows: int = 1, log_y: bool = False) -> tuple[Figure, object]:
    """The one-axes figure of a plot kind with room for ``legend_rows`` above the axes."""
    return _canvas((kind, legend_rows, log_y), lambda: _frame(legend_rows, log_y))


def _plain(text) -> str:
    """Study text for a plot label: a "$" is shown as typed, not as mathematics."""
    return str(text).replace("$", r"\$")


_SUPERSCRIPT = str.maketrans("-0123456789", "\u207b\u2070\u00b9\u00b2\u00b3\u2074\u2075\u2076"
                                           "\u2077\u2078\u2079")


def _power_of_ten(value: float, _pos=None) -> str:
    """A log-axis tick label such as 10⁻³ in plain text (mathtext parsing is slow)."""
    if value <= 0:
        return ""
    exponent = math.log10(value)
    if abs(exponent - round(exponent)) > 1e-9:
        return ""
    return "10" + str(int(round(exponent))).translate(_SUPERSCRIPT)


def _legend(ax, handles=None, labels=None, ncols: int = 3) -> None:
    """The legend above the axes, where it never hides a point."""
    if handles is None:
        handles, labels = ax.get_legend_handles_labels()
    ax.legend(handles, labels, loc="lower left", bbox_to_anchor=(0.0, 1.01), ncols=ncols,
              borderaxespad=0.2, handletextpad=0.4, columnspacing=1.4)


def _rows(n_items: int, ncols: int) -> int:
    return max(1, -(-n_items // ncols))


def _nan(values) -> list[float]:
    return [math.nan if v is None else v for v in values]


def _ratio_styles(rows) -> dict:
    """One colour and marker per organic:aqueous volume ratio, in ratio order."""
    ratios = sorted({r["volume_ratio"] for r in rows if r.get("volume_ratio") is not None})
    return {r: (SERIES[i % len(SERIES)], MARKERS[i % len(MARKERS)]) for i, r in enumerate(ratios)}


@_styled
def log_d_plot(d: dict) -> bytes | None:
    """log D against pH: the fitted curve, its 95 % band, the runs by volume ratio."""
    curve = d.get("curve")
    if not curve:
        return None
    rows = d.get("run_table", [])
    styles = _ratio_styles(rows)
    hollow = any(r["status"] != "used" and r.get("log_d_observed") is not None for r in rows)
    n_drawn = len({r["volume_ratio"] for r in rows if r.get("log_d_observed") is not None})
    advised = _advised_points(d)
    n_legend = 2 + n_drawn + hollow + bool(advised)
    fig, ax = _figure("log_d", _rows(n_legend, 3))
    band = ax.fill_between(curve["pH"], _nan(curve["lo"]), _nan(curve["hi"]), color=BAND,
                           alpha=0.35, linewidth=0, label="95 % band of the fit")
    band.set_gid("fit-band")
    line = curve.get("fine") or curve       # the finer grid where the dict has one
    ax.plot(line["pH"], _nan(line["log_d"]), color=CURVE,
            label=f"fitted ({_plain(d['model'])})", gid="fit-curve")
    for ratio, (colour, marker) in styles.items():
        used = [r for r in rows if r["volume_ratio"] == ratio and r["status"] == "used"
                and r.get("log_d_observed") is not None]
        other = [r for r in rows if r["volume_ratio"] == ratio and r["status"] != "used"
                 and r.get("log_d_observed") is not None]
        if used:
            ax.plot([r["pH"] for r in used], [r["log_d_observed"] for r in used],
                    linestyle="none", marker=marker, markersize=5.5, color=colour,
                    markeredgecolor="white", markeredgewidth=0.5, gid=f"runs-ratio-{ratio:g}")
        if other:
            ax.plot([r["pH"] for r in other], [r["log_d_observed"] for r in other],
                    linestyle="none", marker=marker, markersize=6, markerfacecolor="none",
                    markeredgecolor=colour, markeredgewidth=1.2,
                    gid=f"excluded-ratio-{ratio:g}")
    ax.set_xlabel("pH")
    ax.set_ylabel("log D")
    if not n_drawn:
        ax.text(0.99, 0.03, "no run gives an observed log D to draw",
                transform=ax.transAxes, ha="right", va="bottom", color=INK, fontsize=8.5)
    handles, labels = ax.get_legend_handles_labels()
    drawn = {r["volume_ratio"] for r in rows if r.get("log_d_observed") is not None}
    for ratio, (colour, marker) in styles.items():
        if ratio not in drawn:
            continue
        handles.append(Line2D([], [], linestyle="none", marker=marker, color=colour,
                              markeredgecolor="white", markersize=5.5))
        labels.append(f"runs, org:aq {ratio:g}")
    if hollow:
        handles.append(Line2D([], [], linestyle="none", marker="o", markerfacecolor="none",
                              markeredgecolor=INK, markersize=6))
        labels.append("excluded (hollow)")
    if advised:
        (k, xs, ys) = advised
        line, = ax.plot(xs, ys, **ADVICE_MARKER, gid="advised-runs")
        handles.append(line)
        labels.append(f"advised next runs (batch of {k})")
    _legend(ax, handles, labels)
    return _svg(fig)


#: the advised next runs on the log D plot: a hollow star, unlike any run marker
ADVICE_MARKER = dict(linestyle="none", marker="*", markersize=11, markerfacecolor="white",
                     markeredgecolor=INK, markeredgewidth=1.1, zorder=4)
#: which advised batch the log D plot marks
ADVICE_BATCH = 3


def _advised_points(d: dict) -> tuple[int, list, list] | None:
    """(k, pH, fitted log D) of the advised batch the plot marks, from ``next_runs``."""
    batches = (d.get("next_runs") or {}).get("batches") or []
    chosen = [b for b in batches if b["k"] == ADVICE_BATCH] or batches[-1:]
    if not chosen:
        return None
    groups = [g for g in chosen[0].get("groups", []) if g.get("log_d") is not None]
    if not groups:
        return None
    return chosen[0]["k"], [g["pH"] for g in groups], [g["log_d"] for g in groups]


@_styled
def residual_plot(d: dict) -> bytes | None:
    """Studentized residuals of the used runs against pH, by volume ratio."""
    rows = [r for r in d.get("run_table", []) if r.get("studentized_residual") is not None]
    if not rows:
        return None
    styles = _ratio_styles(rows)
    fig, ax = _figure("residuals", _rows(len(styles), 4))
    ax.axhline(0.0, color=INK, linewidth=0.8)
    for y in (-2.0, 2.0):     # |studentized residual| > 2 is worth a look (common practice)
        ax.axhline(y, color=LIMIT, linewidth=0.8, linestyle=(0, (4, 3)))
    for ratio, (colour, marker) in styles.items():
        sel = [r for r in rows if r["volume_ratio"] == ratio]
        ax.plot([r["pH"] for r in sel], [r["studentized_residual"] for r in sel],
                linestyle="none", marker=marker, markersize=5.5, color=colour,
                markeredgecolor="white", markeredgewidth=0.5, label=f"org:aq {ratio:g}",
                gid=f"residuals-ratio-{ratio:g}")
    ax.set_xlabel("pH")
    ax.set_ylabel("studentized residual")
    top = max(3.0, max(abs(r["studentized_residual"]) for r in rows) * 1.1)
    ax.set_ylim(-top, top)
    _legend(ax, ncols=4)
    return _svg(fig)


@_styled
def portions_plot(pr: dict) -> bytes | None:
    """Remaining fraction after each portion of a procedure, beside the split limit."""
    after = pr.get("after_portions") or []
    if not after:
        return None
    n = [a["portions"] for a in after]
    val = [a["value"] for a in after]
    lo = [a["ci95"][0] for a in after]
    hi = [a["ci95"][1] for a in after]
    fig, ax = _figure("portions", 2, log_y=True)
    err_lo = [v - lo_ if (lo_ is not None and v > 0) else 0.0 for v, lo_ in zip(val, lo)]
    err_hi = [hi_ - v if hi_ is not None else 0.0 for v, hi_ in zip(val, hi)]
    ax.errorbar(n, val, yerr=[err_lo, err_hi], color=SERIES[1], marker="o", markersize=6,
                capsize=3, linewidth=1.4, gid="after-portions",
                label=f"{_plain(pr['id'])}: left in the water after each portion (95 % "
                      "interval)")
    positive = [v for v in val + lo + hi if v is not None and v > 0]
    bottom = min(positive) / 10 if positive else 1e-6
    ax.set_ylim(bottom, 1.5)
    limit = pr.get("split_limit_remaining_fraction", {}).get("value")
    if limit is not None and limit >= bottom:
        ax.axhline(limit, color=LIMIT, linestyle=(0, (5, 3)), gid="split-limit",
                   label="limit: the same total solvent in ever more portions")
    elif limit is not None:
        ax.annotate(f"limit of ever more portions: {fmt_number(limit, 'frac')} (below the axis)",
                    xy=(0.99, 0.02), xycoords="axes fraction", ha="right", va="bottom",
                    color=LIMIT, fontsize=8.5, gid="split-limit-below")
    ax.set_xticks(n)
    ax.set_xlim(0.5, max(n) + 0.5)
    ax.set_xlabel("number of solvent portions")
    ax.set_ylabel("fraction left in the water")
    _legend(ax, ncols=1)
    return _svg(fig)


def _panel_words(n: int) -> str:
    return f"{n} portion" + ("" if n == 1 else "s")


@_styled
def design_space_figure(d: dict) -> Figure | None:
    """The design-space map as a Figure (before SVG): one panel per number of portions.

    Each panel shows the lower 95 % end of recovery (``design_space/recovery_lo_pct``) over pH
    and the organic:aqueous ratio per portion in colour bands, the target as a line, the part
    beyond the measured pH span hatched, and the procedures the dict places on the map.
    """
    ds = d.get("design_space")
    if not ds or not ds.get("pH") or not ds.get("volume_ratio") or not ds.get("portions"):
        return None
    pH = np.asarray(ds["pH"], dtype=float)
    ratio = np.asarray(ds["volume_ratio"], dtype=float)
    if len(pH) < 2 or len(ratio) < 2:
        return None
    target = ds.get("target_pct")
    measured = ds.get("measured_pH")
    places = [p for p in ds.get("procedures", []) if p.get("on_map")]
    grids = [np.ma.masked_invalid(np.asarray(_nan_grid(g), dtype=float))
             for g in ds["recovery_lo_pct"]]
    open_cells = any(np.ma.count_masked(g) for g in grids)
    below = measured is not None and measured[0] > pH[0]
    above = measured is not None and measured[1] < pH[-1]

    handles, labels = [], []
    if target is not None:
        handles.append(Line2D([], [], color=INK, linewidth=1.8, path_effects=HALO))
        labels.append(f"target {target:g} % (lower end)")
    else:
        handles.append(Line2D([], [], linestyle="none"))
        labels.append("no recovery target: no target line")
    if any(p.get("equal_portions", True) for p in places):
        handles.append(Line2D([], [], linestyle="none", marker="o", markersize=6,
                              markerfacecolor="white", markeredgecolor=INK))
        labels.append("procedure")
    if any(not p.get("equal_portions", True) for p in places):
        handles.append(Line2D([], [], linestyle="none", marker="D", markersize=5.5,
                              markerfacecolor="white", markeredgecolor=INK))
        labels.append("procedure, unequal portions")
    if below or above:
        handles.append(Patch(facecolor="white", edgecolor=EXTRAPOLATED, hatch="////",
                             linewidth=0.6))
        labels.append("pH outside the runs (extrapolated)")
    if open_cells:
        handles.append(Patch(facecolor=NO_VALUE, edgecolor=INK, linewidth=0.6))
        labels.append("lower end open")
    rows = _rows(len(handles), 2)

    fig, *axes = _canvas(("design_space", rows, len(grids)),
                         lambda: _map_frame(rows, len(grids)))
    cmap, norm = _map_colours()
    for k, (n, z, ax) in enumerate(zip(ds["portions"], grids, axes)):
        ax.set_gid(f"design-space-{n}")
        ax.set_xlim(pH[0], pH[-1])
        ax.set_ylim(ratio[0], ratio[-1])
        # y given: the title stays at the top of the panel (nothing is drawn above it) and
        # matplotlib skips measuring every tick label to see whether to move it
        ax.set_title(_panel_words(n), fontsize=9.5, color=INK, pad=4, y=1.0)
        values = z.T                                     # rows: ratio, columns: pH
        if values.count():
            fill = ax.contourf(pH, ratio, values, levels=MAP_LEVELS, cmap=cmap, norm=norm)
            fill.set_gid(f"recovery-bands-{n}")
        if target is not None and values.count():
            if values.max() >= target > values.min():
                line = ax.contour(pH, ratio, values, levels=[target], colors=INK,
                                  linewidths=1.8)
                line.set_path_effects(HALO)
                line.set_gid(f"target-{n}")
                spot = _label_spot(ax, line, [(p["pH"], p["volume_ratio"]) for p in places
                                              if p["portions"] == n])
                if spot is not None:
                    for label in ax.clabel(line, fmt={target: f"{target:g} %"}, fontsize=8,
                                           inline=True, inline_spacing=3, manual=[spot]):
                        label.set_path_effects(HALO)
            else:
                where = "everywhere" if values.min() >= target else "nowhere"
                ax.text(0.5, 0.04, f"target met {where}", transform=ax.transAxes,
                        ha="center", va="bottom", fontsize=8, color=INK, path_effects=HALO,
                        gid=f"target-{where}-{n}")
        if below:
            ax.axvspan(pH[0], measured[0], facecolor="none", edgecolor=EXTRAPOLATED,
                       hatch="////", linewidth=0, gid=f"extrapolated-below-{n}")
        if above:
            ax.axvspan(measured[1], pH[-1], facecolor="none", edgecolor=EXTRAPOLATED,
                       hatch="////", linewidth=0, gid=f"extrapolated-above-{n}")
        middle = 0.5 * (pH[0] + pH[-1])
        high_ratio = ratio[-1] ** 0.8 * ratio[0] ** 0.2        # 80 % up the log axis
        for p in places:
            if p["portions"] != n:
                continue
            equal = p.get("equal_portions", True)
            ax.plot([p["pH"]], [p["volume_ratio"]], linestyle="none",
                    marker="o" if equal else "D", markersize=6.5 if equal else 6,
                    markerfacecolor="white", markeredgecolor=INK, markeredgewidth=1.2,
                    gid=f"procedure-{p['id']}", clip_on=False)
            # the label goes toward the middle of the panel, away from its edges and title
            left = p["pH"] <= middle
            low = p["volume_ratio"] <= high_ratio
            ax.annotate(_plain(p["id"]), xy=(p["pH"], p["volume_ratio"]),
                        xytext=(6 if left else -6, 5 if low else -5), textcoords="offset points",
                        ha="left" if left else "right", va="bottom" if low else "top",
                        fontsize=8.5,
                        color=INK, path_effects=HALO, gid=f"procedure-label-{p['id']}")
    fig.legend(handles, labels, loc="upper left", bbox_to_anchor=(0.1, 1.0), ncols=2,
               borderaxespad=0.3, handletextpad=0.4, columnspacing=1.4)
    return fig


def _map_colours(fresh: bool = False) -> tuple:
    """The map's colours and the norm of its bands (one pair per process unless fresh)."""
    if fresh or not _MAP_COLOURS:
        cmap = matplotlib.colormaps[MAP_CMAP].resampled(len(MAP_LEVELS) - 1)
        pair = (cmap, BoundaryNorm(MAP_LEVELS, cmap.N))
        if fresh:
            return pair
        _MAP_COLOURS.append(pair)
    return _MAP_COLOURS[0]


_MAP_COLOURS: list = []


def _map_frame(legend_rows: int, n_panels: int) -> tuple:
    """The map's figure without a study in it: panels on shared log axes, and the colour bar,
    which depends on nothing but the fixed bands and so is not among the axes returned (the
    ones emptied for each map)."""
    height = HEIGHT_IN + 0.2 * legend_rows
    fig = _new_figure(WIDTH_IN, height)
    top = 1.0 - (0.32 + 0.2 * legend_rows) / height
    grid = fig.add_gridspec(1, n_panels + 1, width_ratios=[1.0] * n_panels + [0.07],
                            left=0.1, right=0.9, bottom=0.15, top=top, wspace=0.1)
    axes = []
    for k in range(n_panels):
        ax = fig.add_subplot(grid[0, k], sharey=axes[0] if axes else None)
        axes.append(ax)
        ax.set_facecolor(NO_VALUE)
        ax.set_yscale("log")
        ax.xaxis.set_major_locator(MultipleLocator(2.0))
        ax.yaxis.set_major_locator(FixedLocator(MAP_RATIO_TICKS))
        ax.yaxis.set_major_formatter(FuncFormatter(_plain_number))
        ax.yaxis.set_minor_locator(NullLocator())
        for side in ("top", "right"):
            ax.spines[side].set_visible(True)
        if k:
            ax.tick_params(labelleft=False)
    axes[0].set_ylabel("organic:aqueous per portion")
    axes[len(axes) // 2].set_xlabel("pH")
    # an axis without a label needs no place for it: fixed coordinates spare matplotlib the
    # measuring of every tick label to find one
    for ax in axes:
        for axis in (ax.xaxis, ax.yaxis):
            if not axis.label.get_text():
                axis.set_label_coords(0.5, 0.5)
    cax = fig.add_subplot(grid[0, -1])
    cax.set_gid("colour-bar")
    cmap, norm = _map_colours(fresh=True)   # the bands' norm would redraw the bar per map
    bar = fig.colorbar(ScalarMappable(norm=norm, cmap=cmap), cax=cax, ticks=MAP_LEVELS,
                       spacing="uniform")
    bar.ax.yaxis.set_major_formatter(FuncFormatter(_plain_number))
    bar.outline.set_linewidth(0.6)
    bar.set_label("recovery, 95 % lower bound (%)")
    cax.xaxis.set_label_coords(0.5, 0.5)
    return (fig, *axes)


def _plain_number(value: float, _pos=None) -> str:
    return f"{value:g}"


def _label_spot(ax, contour, avoid) -> tuple[float, float] | None:
    """Where on a contour line its label goes: inside the panel, clear of its edges, away
    from the procedures' markers and labels, and otherwise near half height."""
    verts = [p.vertices for p in contour.get_paths() if len(p.vertices)]
    if not verts:
        return None
    xy = np.concatenate(verts)
    to_axes = ax.transData + ax.transAxes.inverted()
    frac = to_axes.transform(xy)
    inside = np.all((frac > 0.12) & (frac < 0.88), axis=1)
    if not inside.any():
        return None
    far = np.full(len(xy), 0.25)
    if avoid:
        marks = to_axes.transform(np.asarray(avoid, dtype=float))
        gap = np.hypot(frac[:, None, 0] - marks[None, :, 0], frac[:, None, 1] - marks[None, :, 1])
        far = np.minimum(far, gap.min(axis=1))
    score = np.where(inside, far - 0.1 * np.abs(frac[:, 1] - 0.5), -np.inf)
    x, y = xy[int(np.argmax(score))]
    return float(x), float(y)


def _nan_grid(grid) -> list[list[float]]:
    return [_nan(row) for row in grid]


@_styled
def design_space_plot(d: dict) -> bytes | None:
    """The design-space map as SVG; None when the dict has no map."""
    fig = design_space_figure(d)
    return None if fig is None else _svg(fig)


@_styled
def separation_plot(d: dict) -> bytes | None:
    """log10 separation factor against pH for each impurity, with its 95 % band."""
    curves = {k: c for k, c in ((d.get("selectivity") or {}).get("separation") or {}).items()
              if c.get("pH")}
    if not curves:
        return None
    fig, ax = _figure("separation", _rows(2 * len(curves), 2))
    for i, (name, c) in enumerate(curves.items()):
        colour = SERIES[i % len(SERIES)]
        ax.fill_between(c["pH"], _nan(c["lo"]), _nan(c["hi"]), color=colour, alpha=0.25,
                        linewidth=0, label=f"95 % band, {_plain(name)}")
        ax.plot(c["pH"], _nan(c["log_beta"]), color=colour, marker=MARKERS[i % len(MARKERS)],
                markersize=3, markevery=4, label=f"analyte over {_plain(name)}",
                gid=f"separation-{i}")
    ax.axhline(0.0, color=INK, linewidth=0.8)
    ax.set_xlabel("pH")
    ax.set_ylabel("log\u2081\u2080 separation factor \u03b2")
    _legend(ax, ncols=2)
    return _svg(fig)


@_styled
def purity_map_plot(d: dict, k: int) -> bytes | None:
    """Impurity content of the product over (extraction pH, last-step pH) for procedure k;
    cells whose recovery misses the target at the lower end are hatched, the purest pair
    that meets it is starred and the procedure's own pair is marked."""
    pr = ((d.get("selectivity") or {}).get("procedures") or [])[k]
    best = pr.get("best_pH_pair") or {}
    grid = best.get("map")
    if not grid or not grid.get("pH"):
        return None
    pH = np.asarray(grid["pH"], dtype=float)
    content = np.asarray(_nan_grid(grid["log10_impurity_content"]), dtype=float)
    rec_lo = np.asarray(_nan_grid(grid["recovery_lower_pct"]), dtype=float)
    # a new figure each time: the colour bar adds an axes that a kept layout would pile up
    fig, ax = _frame(2)
    ax.grid(False)
    fig.subplots_adjust(right=0.86)
    half = (pH[1] - pH[0]) / 2 if pH.size > 1 else 0.125
    edges = np.concatenate([pH - half, [pH[-1] + half]])
    mesh = ax.pcolormesh(edges, edges, content.T, cmap=MAP_CMAP + "_r", shading="flat",
                         edgecolors="face", linewidth=0.0,
                         rasterized=False)
    target = best.get("target_recovery_pct")
    if target is not None:
        # the cells missing the target as one hatched path of many squares: a hatch per
        # cell made each its own pattern, and a printed page of them tens of megabytes
        from matplotlib.patches import PathPatch
        from matplotlib.path import Path as MplPath

        squares = [[(edges[i], edges[j]), (edges[i + 1], edges[j]),
                    (edges[i + 1], edges[j + 1]), (edges[i], edges[j + 1]), (0.0, 0.0)]
                   for i, j in np.argwhere(rec_lo < target)]
        if squares:
            codes = [MplPath.MOVETO, MplPath.LINETO, MplPath.LINETO, MplPath.LINETO,
                     MplPath.CLOSEPOLY] * len(squares)
            ax.add_patch(PathPatch(MplPath(np.concatenate(squares), codes), hatch="////",
                                   facecolor="none", edgecolor="white", linewidth=0.0,
                                   gid="misses-target"))
    steps = pr["steps"]
    ax.plot([steps[0]["pH"]], [steps[-1]["pH"]], linestyle="none", marker="D", markersize=7,
            markerfacecolor="white", markeredgecolor=INK, label="procedure as written")
    pair = best.get("pair")
    if pair:
        ax.plot([pair["extract_pH"]], [pair["last_step_pH"]], linestyle="none", marker="*",
                markersize=12, markerfacecolor=LIMIT, markeredgecolor="white",
                label="purest pair meeting the target")
    handles, labels = ax.get_legend_handles_labels()
    if target is not None:
        handles.append(Patch(facecolor=NO_VALUE, edgecolor="white", hatch="////"))
        labels.append(f"misses {target:g} % at the lower end")
    cbar = fig.colorbar(mesh, ax=ax, pad=0.02, fraction=0.05)
    cbar.set_label("log\u2081\u2080 impurities, % of product")
    ax.set_xlabel("extraction pH")
    ax.set_ylabel(f"{grid.get('last_step', 'last step')} pH")
    _legend(ax, handles, labels, ncols=2)
    return _svg(fig)


def _log_axis(axis, set_scale) -> None:
    """A logarithmic axis with plain-text powers of ten and no minor ticks."""
    set_scale("log")
    axis.set_minor_locator(NullLocator())
    axis.set_major_formatter(FuncFormatter(_power_of_ten))


@_styled
def calibration_plot(curve: dict, unit: str | None) -> bytes | None:
    """One calibration curve: the standards (failing ones hollow) and the fitted curve."""
    rows = curve.get("standards") or []
    if not rows or not curve.get("curve"):
        return None
    log = curve["curve"]["log_axes"]
    fig, ax = _figure("calibration-log" if log else "calibration", 2)
    if log:
        _log_axis(ax.xaxis, ax.set_xscale)
        _log_axis(ax.yaxis, ax.set_yscale)
    ax.plot(curve["curve"]["level"], _nan(curve["curve"]["response"]), color=CURVE,
            label=f"fitted ({curve['model']}, weighting {curve['weighting']})", gid="cal-curve")
    ok = [r for r in rows if r["verdict"] == "pass"]
    bad = [r for r in rows if r["verdict"] != "pass"]
    if ok:
        ax.plot([r["level"] for r in ok], [r["response"] for r in ok], linestyle="none",
                marker=MARKERS[0], markersize=5.5, color=SERIES[1], markeredgecolor="white",
                markeredgewidth=0.5, label="standards within limits", gid="cal-pass")
    if bad:
        ax.plot([r["level"] for r in bad], [r["response"] for r in bad], linestyle="none",
                marker=MARKERS[1], markersize=6.5, markerfacecolor="none",
                markeredgecolor=LIMIT, markeredgewidth=1.3, label="standards outside limits",
                gid="cal-fail")
    ax.set_xlabel("level" + (f" ({_plain(unit)})" if unit else ""))
    ax.set_ylabel("response ratio" if curve.get("internal_standard") else "response")
    _legend(ax, ncols=2)
    return _svg(fig)


@_styled
def calibration_error_plot(curve: dict, unit: str | None) -> bytes | None:
    """Relative error of each back-calculated standard against its level, with the ICH M10
    limits (+/-15 %, +/-20 % at the LLOQ) as read from the dict."""
    rows = [r for r in curve.get("standards") or [] if r["relative_error_pct"] is not None]
    if not rows:
        return None
    log = curve["curve"]["log_axes"]
    fig, ax = _figure("calibration-errors-log" if log else "calibration-errors", 1)
    if log:
        _log_axis(ax.xaxis, ax.set_xscale)
    ax.axhline(0.0, color=INK, linewidth=0.8)
    levels = sorted({r["level"] for r in rows})
    limit = {r["level"]: r["limit_pct"] for r in rows}
    for sign in (-1.0, 1.0):       # each level's own limit, as a bar at that level
        ax.plot(levels, [sign * limit[x] for x in levels], linestyle="none", marker="_",
                markersize=16, markeredgewidth=1.4, color=LIMIT,
                label="acceptance limit at the level" if sign > 0 else None,
                gid=f"cal-limit-{sign:+g}")
    ok = [r for r in rows if r["verdict"] == "pass"]
    bad = [r for r in rows if r["verdict"] != "pass"]
    if ok:
        ax.plot([r["level"] for r in ok], [r["relative_error_pct"] for r in ok],
                linestyle="none", marker=MARKERS[0], markersize=5.5, color=SERIES[1],
                markeredgecolor="white", markeredgewidth=0.5, label="within limits",
                gid="cal-err-pass")
    if bad:
        ax.plot([r["level"] for r in bad], [r["relative_error_pct"] for r in bad],
                linestyle="none", marker=MARKERS[1], markersize=6.5, markerfacecolor="none",
                markeredgecolor=LIMIT, markeredgewidth=1.3, label="outside limits",
                gid="cal-err-fail")
    top = max(25.0, max(abs(r["relative_error_pct"]) for r in rows) * 1.15)
    ax.set_ylim(-top, top)
    ax.set_xlabel("level" + (f" ({_plain(unit)})" if unit else ""))
    ax.set_ylabel("back-calculated error (%)")
    _legend(ax)
    return _svg(fig)


def study_plots(d: dict) -> dict[str, bytes]:
    """Every plot of one study dict, by file name."""
    out = {}
    svg = log_d_plot(d)
    if svg:
        out[plot_name("log_d")] = svg
    svg = residual_plot(d)
    if svg:
        out[plot_name("residuals")] = svg
    for pr in d.get("procedures", []):
        svg = portions_plot(pr)
        if svg:
            out[plot_name("portions", pr["id"])] = svg
    svg = design_space_plot(d)
    if svg:
        out[plot_name("design_space")] = svg
    svg = separation_plot(d)
    if svg:
        out[plot_name("separation")] = svg
    for k, pr in enumerate((d.get("selectivity") or {}).get("procedures") or []):
        svg = purity_map_plot(d, k)
        if svg:
            out[plot_name("purity_map", pr["id"])] = svg
    cal = d.get("calibration") or {}
    for c in cal.get("curves", []):
        for kind, draw in (("calibration", calibration_plot),
                           ("calibration_errors", calibration_error_plot)):
            svg = draw(c, cal.get("unit"))
            if svg:
                out[plot_name(kind, c["id"])] = svg
    return out
