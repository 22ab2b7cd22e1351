"""The design-space map: what its Figure holds (read before SVG, where text becomes paths), and
the SVG it writes (valid, self-contained, byte-stable)."""

from __future__ import annotations

import copy
import json
import xml.etree.ElementTree as ET

import numpy as np
import pytest
from matplotlib.contour import ContourSet

from extractval.analysis import fit_study
from extractval.report import plots
from extractval.report.plots import (MAP_CMAP, design_space_figure, design_space_plot,
                                     plot_name, study_plots)
from extractval.study import Procedure
from site_factory import synthetic_study

SVG = "{http://www.w3.org/2000/svg}"
PROCS = (Procedure("P1", "three portions", 10.0, 25.0, (10.0, 10.0, 10.0)),
         Procedure("P2", "one portion", 7.0, 25.0, (5.0,)),
         Procedure("P3", "two unequal portions", 9.0, 20.0, (10.0, 4.0)),
         Procedure("P4", "five portions", 10.0, 25.0, (5.0,) * 5))


@pytest.fixture(scope="module")
def d() -> dict:
    study = synthetic_study("SYN-MAP", procedures=PROCS)
    return json.loads(json.dumps(fit_study(study).to_dict(), allow_nan=False))


def panels(fig) -> dict[int, object]:
    return {int(ax.get_gid().rsplit("-", 1)[1]): ax for ax in fig.axes
            if (ax.get_gid() or "").startswith("design-space-")}


def legend_texts(fig) -> list[str]:
    return [t.get_text() for leg in fig.legends for t in leg.get_texts()]


def target_lines(ax) -> list[ContourSet]:
    return [c for c in ax.collections
            if isinstance(c, ContourSet) and (c.get_gid() or "").startswith("target-")]


def test_one_panel_per_number_of_portions_with_a_labelled_colour_bar(d):
    fig = design_space_figure(d)
    p = panels(fig)
    assert sorted(p) == [1, 2, 3] == d["design_space"]["portions"]
    assert [p[n].get_title() for n in (1, 2, 3)] == ["1 portion", "2 portions", "3 portions"]
    for ax in p.values():
        assert ax.get_yscale() == "log"
        assert ax.get_xlim() == (d["design_space"]["pH"][0], d["design_space"]["pH"][-1])
        assert ax.get_ylim() == pytest.approx((d["design_space"]["volume_ratio"][0],
                                               d["design_space"]["volume_ratio"][-1]))
    bar = next(ax for ax in fig.axes if ax.get_gid() == "colour-bar")
    assert bar.get_ylabel() == "recovery, 95 % lower bound (%)"
    bands = [c for ax in p.values() for c in ax.collections
             if (c.get_gid() or "").startswith("recovery-bands-")]
    assert len(bands) == 3 and all(b.get_cmap().name.startswith(MAP_CMAP) for b in bands)


def test_target_line_lies_where_the_dicts_grid_equals_the_target(d):
    """Every vertex of the target line that lies on a grid line of the map is the linear
    interpolation of the dict's values there, equal to the target."""
    ds = d["design_space"]
    target = ds["target_pct"]
    pH, ratio = np.array(ds["pH"]), np.array(ds["volume_ratio"])
    fig = design_space_figure(d)
    checked = 0
    for k, (n, ax) in enumerate(sorted(panels(fig).items())):
        z = np.array(ds["recovery_lo_pct"][k], dtype=float)        # [pH][ratio]
        lines = target_lines(ax)
        assert len(lines) == 1 and list(lines[0].levels) == [target]
        for x, y in np.concatenate([p.vertices for p in lines[0].get_paths()]):
            i = np.flatnonzero(np.isclose(pH, x, atol=1e-9))
            if i.size:                  # on a pH grid line: interpolate along the ratio axis
                checked += 1
                assert np.interp(y, ratio, z[i[0]]) == pytest.approx(target, abs=1e-6)
            j = np.flatnonzero(np.isclose(ratio, y, rtol=1e-9))
            if j.size:                  # on a ratio grid line: interpolate along pH
                checked += 1
                assert np.interp(x, pH, z[:, j[0]]) == pytest.approx(target, abs=1e-6)
    assert checked > 10
    assert f"target {target:g} % (lower end)" in legend_texts(fig)
    inline = [t.get_text() for ax in panels(fig).values() for t in ax.texts]
    assert f"{target:g} %" in inline                       # the line is labelled on the map


def test_procedures_are_marked_in_the_panel_of_their_portions(d):
    fig = design_space_figure(d)
    p = panels(fig)
    places = {q["id"]: q for q in d["design_space"]["procedures"]}
    for pid, n, marker in (("P1", 3, "o"), ("P2", 1, "o"), ("P3", 2, "D")):
        q = places[pid]
        assert q["on_map"] and q["portions"] == n
        mark = [ln for ln in p[n].lines if ln.get_gid() == f"procedure-{pid}"]
        assert len(mark) == 1 and mark[0].get_marker() == marker
        assert mark[0].get_xdata()[0] == q["pH"] and mark[0].get_ydata()[0] == q["volume_ratio"]
        assert [t.get_text() for t in p[n].texts if t.get_gid() == f"procedure-label-{pid}"] \
            == [pid]
        for other in set(p) - {n}:
            assert not [ln for ln in p[other].lines if ln.get_gid() == f"procedure-{pid}"]
    # five portions: not on any panel, and the dict says why
    assert not places["P4"]["on_map"] and "5 portions" in places["P4"]["map_note"]
    assert not [ln for ax in fig.axes for ln in ax.lines if ln.get_gid() == "procedure-P4"]
    assert "procedure, unequal portions" in legend_texts(fig)


def test_beyond_the_measured_pH_is_hatched(d):
    ds = d["design_space"]
    lo, hi = ds["measured_pH"]
    assert (lo, hi) == (6.0, 10.0)
    fig = design_space_figure(d)
    for n, ax in panels(fig).items():
        spans = {pt.get_gid(): pt for pt in ax.patches}
        for side, (x0, x1) in (("below", (ds["pH"][0], lo)), ("above", (hi, ds["pH"][-1]))):
            span = spans[f"extrapolated-{side}-{n}"]
            assert span.get_hatch() == "////"
            xs = span.get_patch_transform().transform(span.get_path().vertices)[:, 0]
            assert (xs.min(), xs.max()) == pytest.approx((x0, x1))


def test_no_target_no_line_and_the_legend_says_so(d):
    e = copy.deepcopy(d)
    e["design_space"]["target_pct"] = None
    fig = design_space_figure(e)
    assert not [t for ax in panels(fig).values() for t in target_lines(ax)]
    assert "no recovery target: no target line" in legend_texts(fig)


@pytest.mark.parametrize("scale, where", [(0.5, "nowhere"), (None, "everywhere")])
def test_a_target_not_crossed_is_written_not_drawn(d, scale, where):
    e = copy.deepcopy(d)
    ds = e["design_space"]
    for grid in ds["recovery_lo_pct"]:
        for row in grid:
            row[:] = [v * scale if scale else 96.0 + 0.01 * v for v in row]
    assert ds["target_pct"] == 95.0
    fig = design_space_figure(e)
    for n, ax in panels(fig).items():
        assert not target_lines(ax)
        assert [t.get_text() for t in ax.texts if t.get_gid() == f"target-{where}-{n}"] \
            == [f"target met {where}"]


def test_open_lower_ends_are_left_blank_and_named(d):
    e = copy.deepcopy(d)
    for grid in e["design_space"]["recovery_lo_pct"]:
        grid[0] = [None] * len(grid[0])
    fig = design_space_figure(e)
    assert "lower end open" in legend_texts(fig)
    assert "lower end open" not in legend_texts(design_space_figure(d))


@pytest.mark.parametrize("change", [
    lambda e: e.pop("design_space"),
    lambda e: e.update(design_space=None),
    lambda e: e["design_space"].update(pH=[]),
    lambda e: e["design_space"].update(pH=[7.0], recovery_lo_pct=[[[50.0] * 13]] * 3),
])
def test_without_a_map_there_is_no_figure(d, change):
    e = copy.deepcopy(d)
    change(e)
    assert design_space_figure(e) is None and design_space_plot(e) is None
    assert plot_name("design_space") not in study_plots(e)
    assert plot_name("log_d") in study_plots(e)            # the other plots still come


def test_svg_is_valid_self_contained_and_byte_stable(d):
    svg = design_space_plot(d)
    assert svg == design_space_plot(copy.deepcopy(d))
    assert study_plots(d)[plot_name("design_space")] == svg
    root = ET.fromstring(svg)
    assert root.tag == f"{SVG}svg"
    ids = {el.get("id") for el in root.iter() if el.get("id")}
    assert {"design-space-1", "design-space-2", "design-space-3", "colour-bar",
            "procedure-P1", "procedure-P2", "procedure-P3"} <= ids
    assert {"target-1", "target-2", "target-3"} <= ids
    assert "procedure-P4" not in ids
    assert not list(root.iter(f"{SVG}text"))               # text drawn as paths: no fonts
    hrefs = [v for el in root.iter() for k, v in el.attrib.items() if k.endswith("href")]
    assert hrefs and all(h.startswith("#") for h in hrefs)  # nothing fetched from outside
    assert b"<dc:date>" not in svg


@pytest.fixture(scope="module")
def other() -> dict:
    """Another study with the same kinds of plots (so the same kept figures draw it)."""
    study = synthetic_study("SYN-OTHER", procedures=PROCS, log_k=1.6, pka=7.4, seed=4,
                            pH=(5.0, 6.0, 7.0, 8.0, 9.0))
    return json.loads(json.dumps(fit_study(study).to_dict(), allow_nan=False))


def test_kept_figures_draw_what_new_figures_draw(d, other):
    """Each figure layout is kept and emptied between plots (for speed): a study's plots are
    the same bytes whether its figures are new or have just drawn another study."""
    plots.forget_canvases()
    fresh = study_plots(d)
    kept = dict(plots._CANVASES)
    assert len(kept) == 4                  # log D, residuals, portions, map
    between = study_plots(other)
    assert dict(plots._CANVASES) == kept   # the other study was drawn on the same figures
    assert study_plots(d) == fresh
    assert between != fresh
    plots.forget_canvases()
    assert study_plots(other) == between


def test_remembered_text_outlines_draw_the_same_bytes(d, monkeypatch):
    remembered = study_plots(d)
    assert plots._TEXT_PATHS._glyphs                      # it was used
    monkeypatch.setattr(plots, "_TEXT_PATHS", None)      # matplotlib's own, per figure
    plots.forget_canvases()
    assert study_plots(d) == remembered
    plots.forget_canvases()


def test_fitted_line_is_drawn_on_the_fine_grid_from_the_textbook_formula(d):
    """The estimate line is traced every 0.05 pH (ten times the band's 0.5), so it has no
    visible corners; its values are the monoprotic base's log D = log K - log10(1 +
    10^(pKa - pH)) (Henderson-Hasselbalch partition relation, common practice) at the fitted
    constants, and the plot draws exactly those points."""
    assert d["model"] == "base"
    curve, fine = d["curve"], d["curve"]["fine"]
    ph = np.array(fine["pH"])
    assert np.allclose(np.diff(ph), 0.05) and ph[0] == curve["pH"][0]
    assert ph[-1] == pytest.approx(curve["pH"][-1])
    log_k, pka = d["parameters"]["logK"]["value"], d["parameters"]["pKa"]["value"]
    textbook = log_k - np.log10(1 + 10 ** (pka - ph))
    assert np.allclose(fine["log_d"], textbook, rtol=0, atol=5e-5)
    # the band's own estimate at its profile points is the same curve
    at = np.searchsorted(ph, np.array(curve["pH"]) - 1e-9)
    assert np.allclose(np.array(fine["log_d"])[at], curve["log_d"], atol=2e-5)
    # drawn: no corner of the line turns by more than a few degrees (the 0.5 pH grid alone
    # turned by more than ten degrees at the bend near the pKa)
    assert max_turn(d) < 4.0
    coarse = copy.deepcopy(d)
    del coarse["curve"]["fine"]
    assert max_turn(coarse) > 10.0


def max_turn(d: dict) -> float:
    """The largest turn, in degrees, between consecutive segments of the drawn fitted line."""
    svg = ET.fromstring(plots.log_d_plot(d))
    line = next(g for g in svg.iter(f"{SVG}g") if g.get("id") == "fit-curve")
    nums = [float(x) for x in next(line.iter(f"{SVG}path")).get("d").replace("M", " ")
            .replace("L", " ").split()]
    xy = np.array(nums).reshape(-1, 2)
    seg = np.diff(xy, axis=0)
    seg = seg[np.hypot(*seg.T) > 1e-6]
    ang = np.degrees(np.arctan2(seg[:, 1], seg[:, 0]))
    return float(np.max(np.abs(np.diff(ang))))
