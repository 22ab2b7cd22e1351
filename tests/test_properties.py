"""Property tests (Hypothesis): what must hold for every input, not only for the examples.

* Readers: any bytes as a runs table (CSV, XLSX, ODS) and any text as study.yaml give a Study or
  located problems, never another exception and never a hang, and the folder is not written.
  (``tests/test_readers.py`` fuzzes CSV bytes and study.yaml from fragments; here the inputs are
  whole random texts and mutations of valid files, which reach deeper into the parsers.)
* The engine: random valid studies give a report whose dict is strict JSON, or a clear problem.
* Chemistry (remaining fraction q_n = prod V_aq / (V_aq + D V_i), IUPAC Gold Book "fraction
  extracted" F02503; the split limit exp(-D V / V_aq) is the n -> infinity limit of
  (1 + D V / (n V_aq))^-n, common practice): recovery grows with the number of portions and
  with D; a fixed volume split into n equal portions does no worse than one portion and no
  better than the split limit; D <= K for the models where only the neutral form partitions.
* Engine bugs these tests found are pinned as plain regression tests in tests/test_fit.py.
* The fit depends neither on the order of the runs nor on the unit of the amounts.

No test here measures speed; the hang guard only stops an endless loop.
"""

from __future__ import annotations

import contextlib
import dataclasses
import io
import json
import math
import signal
import zipfile
from pathlib import Path

import numpy as np
import pytest
from hypothesis import HealthCheck, assume, event, given, settings
from hypothesis import strategies as st

from extractval import chemistry as chem
from extractval.analysis import fit_study
from extractval.errors import Problem
from extractval.simulate import FORMS, simulated_study
from extractval.study import Procedure, Study, Targets, check_study
from tests.study_factory import (HEADER, ROWS, RUNS_CSV, STUDY_YAML, snapshot, write_ods,
                                 write_study, write_xlsx)

_fixture_ok = [HealthCheck.function_scoped_fixture, HealthCheck.too_slow]
READER = settings(max_examples=60, deadline=None, suppress_health_check=_fixture_ok)
ENGINE = settings(max_examples=25, deadline=None, suppress_health_check=[HealthCheck.too_slow])
#: random designs include ill-posed ones that cost seconds each (band, design map): fewer
RANDOM_STUDIES = settings(ENGINE, max_examples=20)
FORMULA = settings(max_examples=300, deadline=None)

#: An example that runs this long is stuck, not slow: every reader answers in well under 1 s.
HANG_S = 60


class Hang(BaseException):
    """Raised by the hang guard; a BaseException so that no reader's ``except Exception``
    can turn it into a problem."""


@contextlib.contextmanager
def no_hang(seconds: int = HANG_S):
    """Stop an example that never returns (a guard against endless loops, not a speed test)."""
    if not hasattr(signal, "SIGALRM"):     # pragma: no cover - not on POSIX
        yield
        return

    def stuck(signum, frame):
        raise Hang(f"no answer after {seconds} s")

    previous = signal.signal(signal.SIGALRM, stuck)
    signal.alarm(seconds)
    try:
        yield
    finally:
        signal.alarm(0)
        signal.signal(signal.SIGALRM, previous)


@pytest.fixture(autouse=True)
def in_tmp(tmp_path, monkeypatch):
    monkeypatch.chdir(tmp_path)
    return tmp_path


def check_unwritten(folder):
    """check_study on ``folder``: a Study or located problems, and the folder left as it was."""
    before = snapshot(folder)
    with no_hang():
        result = check_study(folder)
    assert snapshot(folder) == before
    assert isinstance(result, tuple) and len(result) == 2
    study, problems = result
    assert isinstance(problems, list) and all(isinstance(p, Problem) for p in problems)
    assert (study is None) == any(p.severity == "error" for p in problems)
    assert study is None or isinstance(study, Study)
    for p in problems:
        assert p.file and p.message and str(p)
    return study, problems


# -- (a) readers ---------------------------------------------------------------------------------

def _mutate(data: bytes, edits: list[tuple[float, bytes]], cut: float | None) -> bytes:
    """``data`` with each fragment inserted at its relative position, then cut at ``cut``."""
    out = data
    for where, fragment in edits:
        i = int(where * len(out))
        out = out[:i] + fragment + out[i:]
    return out if cut is None else out[:int(cut * len(out))]


def _edits(fragments):
    return st.lists(st.tuples(st.floats(0, 1), st.one_of(st.sampled_from(fragments),
                                                         st.binary(max_size=12))),
                    max_size=6)


_CSV_FRAGMENTS = [b",", b";", b"\t", b'"', b"\n", b"\r", b"\r\n", b"\xef\xbb\xbf", b"sep=;\n",
                  b"1e400", b"nan", b"-0", b"7,25", b"\xff", b"\x00", b"excluded", b"pH",
                  b"recovery_pct", b"\xe2\x80\xa8"]


@READER
@given(edits=_edits(_CSV_FRAGMENTS), cut=st.none() | st.floats(0, 1))
def test_mutated_runs_csv(tmp_path, edits, cut):
    data = _mutate(RUNS_CSV.encode(), edits, cut)
    check_unwritten(write_study(tmp_path, runs=data))


@READER
@given(data=st.binary(max_size=2000) | st.text(max_size=400).map(str.encode))
def test_any_bytes_as_a_runs_table(tmp_path, data):
    for name in ("runs.csv", "runs.xlsx", "runs.ods"):
        check_unwritten(write_study(tmp_path, runs=data, runs_name=name))


_XML_FRAGMENTS = [b"<", b">", b"&", b"&amp;", b'"', b"</row>", b"<row>", b'<row r="0">',
                  b'<row r="1048577">', b'<c r="XFD2"><v>1</v></c>', b'<c r="A2" t="s"><v>999</v>'
                  b"</c>", b'<c r="B2" t="b"><v>2</v></c>', b'<c r="B2" t="e"><v>#DIV/0!</v></c>',
                  b'<c r="B2"><v>1e999</v></c>', b'<c r="B2" t="inlineStr"><is><t>7,5</t></is></c>',
                  b'<c r="B2" s="999"><v>7</v></c>', b'<c r="B2" t="d"><v>x</v></c>',
                  b"<f>SUM(A1:A2)</f>", b'<dimension ref="A1:ZZ99999999"/>', b"<sheetData/>",
                  b"\xff\xfe", b"<!DOCTYPE x [<!ENTITY a 'b'>]>"]


@pytest.fixture(scope="module")
def workbook_parts(tmp_path_factory):
    """The members of a valid runs workbook, to be mutated and zipped again."""
    path = write_xlsx(tmp_path_factory.mktemp("book") / "runs.xlsx",
                      {1: HEADER, 2: ROWS[0], 3: ROWS[1], 4: ROWS[2]})
    with zipfile.ZipFile(path) as zf:
        return {name: zf.read(name) for name in zf.namelist()}


@READER
@given(part=st.sampled_from(["xl/worksheets/sheet1.xml", "xl/sharedStrings.xml",
                             "xl/workbook.xml", "xl/styles.xml", "[Content_Types].xml"]),
       edits=_edits(_XML_FRAGMENTS), cut=st.none() | st.floats(0, 1), drop=st.booleans())
def test_mutated_xlsx_parts(tmp_path, workbook_parts, part, edits, cut, drop):
    buf = io.BytesIO()
    with zipfile.ZipFile(buf, "w") as zf:
        for name, data in workbook_parts.items():
            if name == part and drop:
                continue
            zf.writestr(name, _mutate(data, edits, cut) if name == part else data)
    folder = write_study(tmp_path, runs=buf.getvalue(), runs_name="runs.xlsx")
    check_unwritten(folder)


@pytest.fixture(scope="module")
def spreadsheet_parts(tmp_path_factory):
    path = write_ods(tmp_path_factory.mktemp("sheet") / "runs.ods", [HEADER, *ROWS, 3])
    with zipfile.ZipFile(path) as zf:
        return {name: zf.read(name) for name in zf.namelist()}


_ODS_FRAGMENTS = [b"<", b"&", b'table:number-rows-repeated="1000000000"',
                  b'table:number-columns-repeated="99999999"', b'office:value-type="float"',
                  b'office:value="x"', b'office:value-type="percentage" office:value="1e400"',
                  b"<table:table-row>", b"</table:table-row>", b"<table:table-cell/>"]


@READER
@given(edits=_edits(_ODS_FRAGMENTS), cut=st.none() | st.floats(0, 1))
def test_mutated_ods_content(tmp_path, spreadsheet_parts, edits, cut):
    buf = io.BytesIO()
    with zipfile.ZipFile(buf, "w") as zf:
        for name, data in spreadsheet_parts.items():
            zf.writestr(name, _mutate(data, edits, cut) if name == "content.xml" else data)
    check_unwritten(write_study(tmp_path, runs=buf.getvalue(), runs_name="runs.ods"))


@READER
@given(text=st.text(max_size=300))
def test_any_text_as_study_yaml(tmp_path, text):
    check_unwritten(write_study(tmp_path, yaml_text=text))


_YAML_FRAGMENTS = [b":", b"- ", b"  ", b"\t", b"'", b'"', b"[", b"{", b"&a ", b"*a", b"!!str ",
                   b"!!python/object:os.system ", b"~", b"null", b"1e400", b".nan", b"\n", b"#",
                   b"%YAML 1.1\n", b"---\n", b"...\n", b"? ", b"<<: *a\n", b"\xff", b"\x00"]


@READER
@given(edits=_edits(_YAML_FRAGMENTS), cut=st.none() | st.floats(0, 1))
def test_mutated_study_yaml(tmp_path, edits, cut):
    data = _mutate(STUDY_YAML.format(runs="runs.csv").encode(), edits, cut)
    check_unwritten(write_study(tmp_path, yaml_bytes=data))


# -- (b) random valid studies through the engine ---------------------------------------------------

@st.composite
def studies(draw, forms=FORMS, fit_auto: bool = True) -> Study:
    """A simulated study with a random model, truth, pH design, forms, sigma and procedures."""
    model = draw(st.sampled_from(["neutral", "acid", "base", "ampholyte"]))
    log_k = draw(st.floats(-1.0, 5.0))
    if model == "ampholyte":
        pka1 = draw(st.floats(1.0, 9.0))
        theta = (log_k, pka1, pka1 + draw(st.floats(1.0, 5.0)))
    elif model == "neutral":
        theta = (log_k,)
    else:
        theta = (log_k, draw(st.floats(2.0, 12.0)))
    ion_pair = model in ("acid", "base") and draw(st.booleans())
    if ion_pair:
        theta = (*theta, log_k - draw(st.floats(0.5, 5.0)))
    # an ampholyte measured at fewer pH values than it has parameters is valid input too: its
    # profiles are flat along a valley the runs do not determine (open ends, warnings)
    pH = draw(st.lists(st.floats(0.0, 14.0).map(lambda x: round(x, 2)),
                       min_size=1, max_size=8, unique=True))
    ratios = tuple(draw(st.lists(st.sampled_from([0.01, 0.1, 0.5, 1.0, 2.0, 5.0]), min_size=1,
                                 max_size=3, unique=True)))
    parts = draw(st.lists(st.sampled_from(forms), min_size=1, max_size=2))
    sigma = draw(st.sampled_from([0.0, 0.005, 0.02, 0.05, 0.1]))
    seed = draw(st.integers(0, 2**32 - 1))
    runs = []
    for k, form in enumerate(parts):
        part = simulated_study("S", model, theta, pH, form=form, ratios=ratios,
                               replicates=draw(st.integers(1, 3)), sigma=sigma,
                               rng=[seed, k], ion_pair=ion_pair)
        runs += [dataclasses.replace(r, run_id=f"{r.run_id}-{k}") for r in part.runs]
    for i in draw(st.lists(st.integers(0, len(runs) - 1), max_size=3, unique=True)):
        runs[i] = dataclasses.replace(runs[i], excluded="spilled")
    procs = tuple(Procedure(f"P{i}", "drawn", round(draw(st.floats(0.0, 14.0)), 2),
                            draw(st.sampled_from([5.0, 25.0, 100.0])),
                            tuple(draw(st.lists(st.sampled_from([1.0, 5.0, 10.0, 50.0]),
                                                min_size=1, max_size=4))))
                  for i in range(draw(st.integers(0, 2))))
    target = draw(st.none() | st.sampled_from([50.0, 95.0, 99.9, 100.0]))
    fit_as = "auto" if fit_auto and not ion_pair and draw(st.booleans()) else model
    return Study("RANDOM", Path("simulated") / "RANDOM", "Random study", "SIM", fit_as,
                 tuple(runs), procs, Targets(recovery_pct=target), ion_pair=ion_pair,
                 system={"aqueous": "buffer", "organic": "solvent", "temperature_C": 25.0})


@RANDOM_STUDIES
@given(study=studies())
def test_random_valid_studies_give_strict_json_or_a_clear_problem(study):
    report = fit_study(study)
    d = report.to_dict()
    text = json.dumps(d, allow_nan=False)
    assert json.loads(text)["study"] == "RANDOM"
    event("fitted" if report.fit is not None else "not fitted")
    if report.fit is None:
        assert d["problems"] and all(isinstance(p, str) and len(p) > 20 for p in d["problems"])
        return
    assert list(d["parameters"]) == list(report.fit.model.params)
    # an estimate lies inside its own interval (an open end is None)
    for name, est in d["parameters"].items():
        lo, hi = est["ci95"]
        assert lo is None or lo <= est["value"] + 1e-9, (name, est)
        assert hi is None or est["value"] <= hi + 1e-9, (name, est)
    for proc in d["procedures"]:
        rec = proc["recovery_pct"]
        lo, hi = rec["ci95"]
        assert 0.0 <= rec["value"] <= 100.0
        assert lo is None or lo <= rec["value"] + 1e-9
        assert hi is None or rec["value"] <= hi + 1e-9


# -- (c) chemistry -------------------------------------------------------------------------------

positive_D = st.floats(1e-6, 1e6)
volume = st.floats(0.1, 1000.0)


@FORMULA
@given(D=positive_D, aq=volume, org=volume, n=st.integers(1, 30))
def test_recovery_grows_with_the_number_of_portions(D, aq, org, n):
    q_n = chem.remaining_fraction(D, aq, [org] * n)
    q_more = chem.remaining_fraction(D, aq, [org] * (n + 1))
    assert q_more <= q_n
    assert 0.0 <= q_more < 1.0


@FORMULA
@given(D=positive_D, factor=st.floats(1.0, 1e3), aq=volume,
       portions=st.lists(volume, min_size=1, max_size=5))
def test_recovery_grows_with_D(D, factor, aq, portions):
    assert chem.remaining_fraction(D * factor, aq, portions) <= chem.remaining_fraction(
        D, aq, portions)


@FORMULA
@given(D=positive_D, aq=volume, total=volume, n=st.integers(1, 200))
def test_a_split_volume_lies_between_one_portion_and_the_split_limit(D, aq, total, n):
    one = chem.remaining_fraction(D, aq, [total])
    split = chem.remaining_fraction(D, aq, [total / n] * n)
    limit = chem.split_limit_remaining(D, aq, total)
    # equal up to rounding at n = 1 (one portion) and where q underflows towards 0
    assert split <= one * (1 + 1e-12)
    assert split >= limit * (1 - 1e-9)


_pH = st.floats(0.0, 14.0)
_logK = st.floats(-6.0, 12.0)
_pKa = st.floats(-3.0, 17.0)


@FORMULA
@given(pH=st.lists(_pH, min_size=1, max_size=10), log_k=_logK, pka=_pKa, pka2=_pKa)
def test_D_never_exceeds_K_when_only_the_neutral_form_partitions(pH, log_k, pka, pka2):
    pH = np.array(pH)
    assert np.all(chem.log_d_neutral(pH, log_k) == log_k)
    assert np.all(chem.log_d_acid(pH, log_k, pka) <= log_k)
    assert np.all(chem.log_d_base(pH, log_k, pka) <= log_k)
    lo, hi = sorted((pka, pka2))
    assert np.all(chem.log_d_ampholyte(pH, log_k, lo, hi) <= log_k)


# -- (d) invariance --------------------------------------------------------------------------------

@st.composite
def designed_studies(draw) -> Study:
    """Well-posed studies: the pH design brackets the pKa, recoveries stay informative."""
    model = draw(st.sampled_from(["neutral", "acid", "base", "ampholyte"]))
    log_k = draw(st.floats(0.0, 4.0))
    if model == "ampholyte":
        pka1 = draw(st.floats(2.0, 5.0))
        theta = (log_k, pka1, pka1 + draw(st.floats(4.0, 6.0)))
        pH = np.arange(pka1 - 2.0, theta[2] + 2.01, 1.0)
    elif model == "neutral":
        theta, pH = (log_k,), np.array([6.0, 7.0, 8.0])
    else:
        theta = (log_k, draw(st.floats(3.0, 10.0)))
        pH = theta[1] + np.array([-2.0, -1.0, 0.0, 1.0, 2.0])
    form = draw(st.sampled_from(["both", "organic", "aqueous"]))
    ratios = (0.5, 1.0, 2.0) if form == "both" else tuple(r * 10 ** -log_k for r in (0.5, 1, 2))
    procs = (Procedure("P1", "three portions", float(np.round(np.median(pH), 2)), 25.0,
                       (10.0, 10.0, 10.0)),)
    return simulated_study("INV", model, theta, np.round(pH, 2), procs,
                           targets=Targets(recovery_pct=95.0), form=form, ratios=ratios,
                           sigma=draw(st.sampled_from([0.02, 0.05])),
                           rng=draw(st.integers(0, 2**32 - 1)))


def _numbers(study: Study) -> dict:
    fit = fit_study(study)
    assert fit.fit is not None, fit.problems
    out = {}
    for name, est in fit.fit.parameters.items():
        out[name] = (est.value, est.ci95.lo, est.ci95.hi)
    for p in fit.predictions:
        out[p.procedure.id] = (p.recovery_pct.value, p.recovery_pct.ci95.lo,
                               p.recovery_pct.ci95.hi)
    return out


def _same(a: dict, b: dict) -> None:
    assert a.keys() == b.keys()
    for key in a:
        (va, la, ha), (vb, lb, hb) = a[key], b[key]
        assert math.isclose(va, vb, rel_tol=1e-8, abs_tol=1e-8), (key, va, vb)
        for ea, eb in ((la, lb), (ha, hb)):
            assert (ea is None) == (eb is None), (key, a[key], b[key])
            if ea is not None:
                assert math.isclose(ea, eb, rel_tol=1e-6, abs_tol=1e-6), (key, a[key], b[key])


@ENGINE
@given(study=designed_studies(), order=st.randoms(use_true_random=False))
def test_fit_does_not_depend_on_the_order_of_the_runs(study, order):
    runs = list(study.runs)
    order.shuffle(runs)
    assume([r.run_id for r in runs] != [r.run_id for r in study.runs])
    _same(_numbers(study), _numbers(dataclasses.replace(study, runs=tuple(runs))))


@ENGINE
@given(study=designed_studies(), unit=st.sampled_from([1e-3, 1e3, 1e6]))
def test_fit_does_not_depend_on_the_unit_of_the_amounts(study, unit):
    def scaled(r):
        return dataclasses.replace(r, **{k: getattr(r, k) * unit
                                         for k in ("spiked", "found_aqueous", "found_organic")
                                         if getattr(r, k) is not None})

    other = dataclasses.replace(study, runs=tuple(scaled(r) for r in study.runs))
    _same(_numbers(study), _numbers(other))
