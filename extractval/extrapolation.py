"""Predictions outside the data: is a procedure inside the pH span and volume ratios of the runs?

A fitted log D(pH) is known only where runs were made. A procedure whose pH, pH tolerance band
or any step's pH lies outside the measured pH span, or whose organic:aqueous volume ratio (each
portion, each step) lies outside the measured ratios, is predicted by extrapolation: its
recovery verdict is not judged, and the study warns (``extractval check``, ``fit`` and the page).

The tolerance rule is the project's convention (not a published standard):

* **pH.** A pH up to :data:`PH_SLACK` (0.05 unit) outside the span of the runs still counts as
  inside: a glass electrode reads a buffer to a few hundredths of a unit (common practice), so
  a procedure written "pH 10.3" is inside runs measured at 10.28.
* **Volume ratio.** A ratio up to :data:`RATIO_SLACK` (10 %, relative) outside the smallest or
  largest measured ratio still counts as inside: flasks are filled to a few percent, and the
  distribution ratio's independence of the volume ratio (OECD TG 107 runs three ratios to show
  it) is not expected to break within that.

The span is that of the runs that enter the fit: not excluded, not left out by a failing
system-suitability sequence, and with a measurement that gives a finite value on the log scale
(as ``analysis.build_observations`` decides). Pure Python: it
runs in ``extractval check``, which loads no numpy.
"""

from __future__ import annotations

from dataclasses import dataclass

#: pH units outside the measured span that still count as inside (project convention)
PH_SLACK = 0.05
#: relative amount by which a volume ratio may lie outside the measured ratios (convention)
RATIO_SLACK = 0.10
#: the first words of every extrapolation finding (verdict details, warnings)
MARK = "extrapolated beyond the runs"


def enters_fit(run) -> bool:
    """Whether a run enters the fit: not excluded, not left out by a failing system-suitability
    sequence, and some measured amount above zero (Run.fitted_phase, which
    analysis.build_observations uses too)."""
    if run.excluded or getattr(run, "suitability", None):
        return False
    return run.fitted_phase is not None


def _g(x: float) -> str:
    return f"{x:.3g}" if abs(x) < 10 else f"{x:g}"


@dataclass(frozen=True)
class Span:
    """The measured pH span and organic:aqueous volume ratios of the runs in the fit."""

    pH: tuple[float, float]
    ratio: tuple[float, float]

    @classmethod
    def of_runs(cls, runs) -> "Span | None":
        return cls.of_fitted([r for r in runs if enters_fit(r)])

    @classmethod
    def of_fitted(cls, runs) -> "Span | None":
        """:meth:`of_runs` of runs already known to enter the fit (the runs
        analysis.build_observations used), without asking each run again."""
        if not runs:
            return None
        pHs = [r.pH for r in runs]
        ratios = [r.volume_ratio for r in runs]
        return cls((min(pHs), max(pHs)), (min(ratios), max(ratios)))

    @property
    def pH_inside(self) -> tuple[float, float]:
        """The span with its slack: what still counts as inside."""
        return self.pH[0] - PH_SLACK, self.pH[1] + PH_SLACK

    def pH_words(self) -> str:
        return f"pH {self.pH[0]:.2f} to {self.pH[1]:.2f}"

    def ratio_words(self) -> str:
        return f"organic:aqueous {_g(self.ratio[0])} to {_g(self.ratio[1])}"

    def has_pH(self, x: float) -> bool:
        lo, hi = self.pH_inside
        return lo - 1e-9 <= x <= hi + 1e-9

    def has_ratio(self, r: float) -> bool:
        lo, hi = self.ratio
        return lo / (1 + RATIO_SLACK) * (1 - 1e-9) <= r <= hi * (1 + RATIO_SLACK) * (1 + 1e-9)

    def clip_pH(self, lo: float, hi: float) -> tuple[float, float] | None:
        """[lo, hi] inside the span (with its slack), or None when none of it is."""
        a, b = max(lo, self.pH_inside[0]), min(hi, self.pH_inside[1])
        return (a, b) if a <= b + 1e-12 else None


def _ratios(p) -> list[tuple[tuple[str, int], float]]:
    """((step words, portion number), organic:aqueous ratio) of every equilibration."""
    if not p.steps:
        return [(("", i), v / p.aqueous_mL) for i, v in enumerate(p.organic_mL, 1)]
    out: list[tuple[tuple[str, int], float]] = []
    organic = 0.0
    for k, s in enumerate(p.steps, 1):
        if s.kind == "extract":
            organic = float(sum(s.organic_mL))
            out += [((f"step {k} ({s.kind}), ", i), v / s.aqueous_mL[0])
                    for i, v in enumerate(s.organic_mL, 1)]
        else:
            out += [((f"step {k} ({s.kind}), ", i), organic / v)
                    for i, v in enumerate(s.aqueous_mL, 1)]
    return out


def _grouped(items) -> list[str]:
    """'portions 1 to 3 at organic:aqueous 0.4' for equal ratios of one step in a row."""
    out: list[list] = []
    for (step, i), r in items:
        last = out[-1] if out else None
        if last and last[0] == step and last[2] == i - 1 and _g(last[3]) == _g(r):
            last[2] = i
        else:
            out.append([step, i, i, r])
    def which(a: int, b: int) -> str:
        return (f"portion {a}" if a == b else f"portions {a} and {b}" if b == a + 1 else
                f"portions {a} to {b}")

    return [f"{step}{which(a, b)} at organic:aqueous {_g(r)}" for step, a, b, r in out]


@dataclass(frozen=True)
class Extrapolation:
    """What of one procedure lies outside the runs, in words, and the reason a verdict gives."""

    procedure: str
    pH_outside: tuple[str, ...]
    ratio_outside: tuple[str, ...]
    span: Span

    @property
    def reason(self) -> str:
        """'extrapolated beyond the runs (pH 6.28 to 10.31): ...' naming what lies outside."""
        spans = []
        if self.pH_outside:
            spans.append(self.span.pH_words())
        if self.ratio_outside:
            spans.append(self.span.ratio_words())
        return (f"{MARK} ({'; '.join(spans)}): "
                + "; ".join(self.pH_outside + self.ratio_outside) + " outside them")

    def to_dict(self) -> dict:
        return {"pH_outside": list(self.pH_outside), "ratio_outside": list(self.ratio_outside),
                "measured_pH": list(self.span.pH), "measured_ratio": list(self.span.ratio),
                "reason": self.reason}


def extrapolation(p, span: Span | None) -> Extrapolation | None:
    """What of procedure ``p`` lies outside ``span`` (None when all of it is inside)."""
    if span is None:
        return None
    ph_out = []
    tol = p.pH_tolerance or 0.0
    lo, hi = p.pH - tol, p.pH + tol
    if not (span.has_pH(lo) and span.has_pH(hi)):
        ph_out.append(f"pH {p.pH:g} ± {tol:g}" if tol else f"pH {p.pH:g}")
    for k, s in enumerate(p.steps[1:], 2):
        if not span.has_pH(s.pH):
            ph_out.append(f"step {k} ({s.kind}) at pH {s.pH:g}")
    ratio_out = _grouped([(where, r) for where, r in _ratios(p) if not span.has_ratio(r)])
    if not ph_out and not ratio_out:
        return None
    return Extrapolation(p.id, tuple(ph_out), tuple(ratio_out), span)


def extrapolation_problems(procedures, span: Span | None, file: str | None):
    """One located warning per procedure predicted by extrapolation (study.yaml, its line)."""
    from .errors import Problem

    out = []
    for i, p in enumerate(procedures, 1):
        x = extrapolation(p, span)
        if x is None:
            continue
        out.append(Problem(
            f"procedure {p.id!r} is {x.reason}: its recovery is predicted by extrapolating "
            "the fitted model, so its recovery verdict is not judged",
            file=file, line=p.line, key=f"procedures[{i}]", severity="warning",
            expected=f"pH and volume ratios inside those of the runs (within {PH_SLACK:g} pH "
                     f"unit and {100 * RATIO_SLACK:g} % of the ratio, a project convention), or "
                     "runs made at the procedure's conditions"))
    return out
