"""Batch mode: one report per scenario file, parallel workers, an index across them.

The reference for every figure is the project's own single run: a scenario evaluated
alone with ``tco.pipeline.evaluate`` and summarised with ``tco.report.summary.
build_summary`` (what ``tco run`` writes). A batch must reproduce it exactly, whatever
the number of workers, and report a bad scenario with the same one line ``tco run`` would
print, while the others finish. Summary keys are read by the paths documented in
``docs/summary-schema.md``, independently of the index code.

Scenarios are the bundled invented demo with small changes; the Monte Carlo is off or
kept at 200 draws so the tests stay quick on two cores.
"""
from __future__ import annotations

import json
import math
import os
import re
from html.parser import HTMLParser
from pathlib import Path

import openpyxl
import pypdf
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from tco import batch
from tco.errors import InputError
from tco.pipeline import evaluate
from tco.report import context as report_context
from tco.report.batch_index import currency_totals
from tco.report.summary import build_summary
from tco.resources import demo_path
from tco.scenario import load_scenario

DEMO = demo_path().read_text(encoding="utf-8")
DEMO_NAME = 'name = "Maravell Freight — Orrin Flats to Tessaly Junction"'
HOSTILE_NAME = '=HYPERLINK("http://x","y") <img src=file:///etc/passwd> & <b>bold</b>'


def _scenario(folder: Path, file: str, *, slug: str | None, name: str | None = None,
              draws: int | None = None, replace: tuple = ()) -> Path:
    """Write a variant of the demo: its slug, study name, draws (None: no uncertainty)."""
    text = DEMO
    assert 'slug = "demo"\n' in text and DEMO_NAME in text
    text = text.replace('slug = "demo"\n', f'slug = "{slug}"\n' if slug else "")
    if name is not None:
        text = text.replace(DEMO_NAME, "name = " + json.dumps(name, ensure_ascii=False))
    if draws is None:
        text = text.replace("enabled = true", "enabled = false", 1)
    else:
        text = text.replace("draws = 10000", f"draws = {draws}", 1)
    for old, new in replace:
        assert old in text, old
        text = text.replace(old, new, 1)
    path = folder / file
    path.write_text(text, encoding="utf-8")
    return path


def _alone(path: Path) -> dict:
    """The summary of one scenario run on its own (the reference)."""
    return build_summary(evaluate(load_scenario(path)))


def _error_alone(path: Path) -> str:
    """The one line ``tco run`` prints for a bad scenario."""
    with pytest.raises(InputError) as info:
        evaluate(load_scenario(path))
    return info.value.line()


def _without_time(summary: dict) -> dict:
    return {k: v for k, v in summary.items() if k != "generated"}


def _same(a, b, path="") -> None:
    """Assert two JSON-like trees equal, floats to 1e-12 relative.

    The energy kernel is compiled with fast-math (reassociated sums); code compiled in this
    process and code loaded from numba's on-disk cache by a worker can round the last bit
    differently (seen: 1e-16 relative on a cold cache), so results from other processes
    are compared to 1e-12 rather than bit for bit. Everything else must be identical.
    """
    if isinstance(a, dict) and isinstance(b, dict):
        assert a.keys() == b.keys(), path
        for k in a:
            _same(a[k], b[k], f"{path}.{k}")
    elif isinstance(a, list) and isinstance(b, list):
        assert len(a) == len(b), path
        for i, (x, y) in enumerate(zip(a, b)):
            _same(x, y, f"{path}[{i}]")
    elif isinstance(a, float) and isinstance(b, float):
        assert a == pytest.approx(b, rel=1e-12, abs=1e-300), path
    else:
        assert a == b, path


def _read(path: Path) -> dict:
    return json.loads(path.read_text(encoding="utf-8"))


def _squash(text: str) -> str:
    return re.sub(r"\s+", "", text)


@pytest.fixture
def three(tmp_path) -> Path:
    """Three good clients: EUR without uncertainty, USD with 200 draws, EUR dearer diesel."""
    folder = tmp_path / "clients"
    folder.mkdir()
    _scenario(folder, "a-north.toml", slug="north")
    _scenario(folder, "b-west.toml", slug="west", name="West client", draws=200,
              replace=(('currency = "EUR"', 'currency = "USD"'),))
    _scenario(folder, "c-south.toml", slug=None, name="South client",
              replace=(("diesel = 1.48 ", "diesel = 1.95 "),))
    return folder


# ---------------------------------------------------------------- equal to single runs --
def test_batch_tells_each_client_as_it_finishes(three, tmp_path):
    """``on_done`` is called once per client; the console line names the client, the
    verdict, the present value difference and the tonnes avoided (formatting.client_line)."""
    from tco.report.batch_index import outcome_row
    from tco.report.formatting import client_line

    seen = []
    outcome = batch.run_batch(three, tmp_path / "out", jobs=1, json_only=True,
                              on_done=lambda sc: seen.append(client_line(outcome_row(sc))))
    assert len(seen) == len(outcome.scenarios) == 3
    for sc in outcome.scenarios:
        row = outcome_row(sc)
        diff = row["present_value_difference"]
        line = next(x for x in seen if x.startswith(row["study"] + ":"))
        word = "cheaper" if diff < 0 else "dearer"
        # hand-written: the absolute difference with separators and the currency code
        assert f"{row['truck']} {word} by {abs(diff):,.0f} {row['currency']}" in line
        assert f"avoids {row['avoided_t_co2e']:,.0f} t CO2e" in line


def test_batch_equals_individual_runs(three, tmp_path):
    """Each client's summary.json and index row equal the scenario run alone.

    Reference: ``evaluate`` + ``build_summary`` on each file (what ``tco run`` writes);
    summary keys by the paths in docs/summary-schema.md.
    """
    out = tmp_path / "out"
    outcome = batch.run_batch(three, out, jobs=1, json_only=True)
    assert outcome.all_ok and outcome.name == "clients" and outcome.jobs == 1
    assert [s.file for s in outcome.scenarios] == ["a-north.toml", "b-west.toml",
                                                   "c-south.toml"]
    assert [s.slug for s in outcome.scenarios] == ["north", "west", "c-south"]
    index = _read(out / "clients" / "index.json")
    assert outcome.index == [out / "clients" / "index.json"]   # json_only: no PDF, no xlsx
    assert index["counts"] == {"scenarios": 3, "ok": 3, "errors": 0}
    # the three JSON outputs share these top-level keys (added beside the old ones)
    first = _read(out / "clients" / outcome.scenarios[0].slug / "summary.json")
    for key in ("schema_version", "tool", "generated"):
        assert key in index and key in first
    assert index["schema"] == "tco.batch.index/1.1" and index["schema_version"] == "1.1"
    for sc, row in zip(outcome.scenarios, index["rows"]):
        ref = _alone(three / sc.file)
        written = _read(out / "clients" / sc.slug / "summary.json")
        _same(_without_time(written), _without_time(ref))
        assert sc.summary == written and sc.outputs == [f"{sc.slug}/summary.json"]
        comp = ref["cashflow"]["comparisons"][0]
        truck, base = comp["truck"], comp["baseline"]
        cf = ref["cashflow"]["trucks"]
        em = ref["emissions"]["comparison"][truck]
        assert row["file"] == sc.file and row["status"] == "ok"
        assert row["study"] == ref["scenario"]["name"]
        assert row["currency"] == ref["scenario"]["currency"]
        assert (row["truck"], row["baseline"]) == (truck, base)
        assert row["present_value_baseline"] == cf[base]["present_value"]
        assert row["present_value_truck"] == cf[truck]["present_value"]
        assert row["present_value_difference"] == comp["present_value_difference"]
        assert row["truck_cheaper"] == (comp["present_value_difference"] < 0)
        assert row["levelized_cost_per_km_baseline"] == cf[base]["levelized_cost_per_km"]
        assert row["levelized_cost_per_km_truck"] == cf[truck]["levelized_cost_per_km"]
        assert row["simple_payback_year"] == comp["simple_payback_year"]
        assert row["irr"] == comp["irr"]
        assert row["avoided_t_co2e"] == em["avoided_kg_total"]["location"] / 1000
        assert row["abatement_cost_per_t_co2e"] == em["abatement_cost_per_tonne"]["location"]
        feas = ref["trucks"][truck]["feasibility"]
        assert (row["battery_new"] == "yes") == feas["battery"]["new"]["ok"]
        assert (row["battery_end_of_life"] == "yes") == feas["battery"]["end_of_life"]["ok"]
        assert row["feasible"] == feas["feasible"]
        if ref["uncertainty"] is None:
            assert row["probability_cheaper"] is None and row["draws"] is None
        else:
            mc = ref["uncertainty"]["monte_carlo"][truck]
            assert row["probability_cheaper"] == mc["probability_cheaper"]
            assert row["draws"] == ref["uncertainty"]["draws"] == 200
        assert row["links"] == {"summary.json": f"{sc.slug}/summary.json"}
    # The dearer diesel of c-south makes the electric truck cheaper than in a-north.
    north, south = index["rows"][0], index["rows"][2]
    assert south["present_value_difference"] < north["present_value_difference"]
    # Totals per currency only: EUR from a and c, USD from b alone.
    by_cur = {t["currency"]: t for t in index["totals"]["by_currency"]}
    rows = index["rows"]
    assert set(by_cur) == {"EUR", "USD"}
    assert by_cur["EUR"]["clients"] == 2 and by_cur["USD"]["clients"] == 1
    assert math.isclose(by_cur["EUR"]["present_value_difference"],
                        rows[0]["present_value_difference"] + rows[2]["present_value_difference"])
    assert by_cur["USD"]["present_value_difference"] == rows[1]["present_value_difference"]
    assert "present_value_difference" not in index["totals"]["all_currencies"]


def test_parallel_equals_inline(three, tmp_path):
    """Two worker processes give the same files and index as one process."""
    one = batch.run_batch(three, tmp_path / "one", jobs=1, json_only=True)
    two = batch.run_batch(three, tmp_path / "two", jobs=2, json_only=True)
    assert two.jobs == 2 and two.all_ok
    _same(_read(one.index[0])["rows"], _read(two.index[0])["rows"])
    for a, b in zip(one.scenarios, two.scenarios):
        assert (a.file, a.slug, a.outputs) == (b.file, b.slug, b.outputs)
        _same(_without_time(a.summary), _without_time(b.summary))
        _same(_without_time(_read(tmp_path / "two" / "clients" / b.slug / "summary.json")),
              _without_time(a.summary))


# ---------------------------------------------------------------- bad scenarios ----------
@pytest.mark.parametrize("jobs", [1, 2])
def test_bad_scenarios_are_reported_and_the_rest_finish(tmp_path, jobs):
    """Each bad file gives the one line ``tco run`` prints for it; the others complete."""
    folder = tmp_path / "mixed"
    folder.mkdir()
    _scenario(folder, "a-good.toml", slug="good-a")
    _scenario(folder, "b-bad-field.toml", slug="bad-field",
              replace=(('curb_mass = "15.2 t"', "curb_mass = -3"),))
    start = DEMO.index("[[route.legs]]")
    legs = DEMO[start:DEMO.index("# ----", start)]
    _scenario(folder, "c-missing-trace.toml", slug="missing-trace",
              replace=((legs, '[[route.legs]]\npayload = 10\nfile = "nowhere.csv"\n\n'),))
    (folder / "d-not-toml.toml").write_text("[study\nname = 'x'\n", encoding="utf-8")
    # A trace whose time runs backwards: found only while evaluating (in the worker).
    (folder / "backwards.csv").write_text("time [s],speed [km/h],grade [%]\n0,0,0\n1,10,0\n"
                                          "0.5,12,0\n", encoding="utf-8")
    _scenario(folder, "e-bad-trace.toml", slug="bad-trace",
              replace=((legs, '[[route.legs]]\npayload = 10\nfile = "backwards.csv"\n\n'),))
    _scenario(folder, "f-good.toml", slug="good-f", name="Good F")
    out = tmp_path / "out"

    outcome = batch.run_batch(folder, out, jobs=jobs, json_only=True)

    assert not outcome.all_ok
    status = {s.file: s.status for s in outcome.scenarios}
    assert status == {"a-good.toml": "ok", "b-bad-field.toml": "error",
                      "c-missing-trace.toml": "error", "d-not-toml.toml": "error",
                      "e-bad-trace.toml": "error", "f-good.toml": "ok"}
    expected = {name: _error_alone(folder / name) for name in
                ("b-bad-field.toml", "c-missing-trace.toml", "d-not-toml.toml",
                 "e-bad-trace.toml")}
    got = {s.file: s.error for s in outcome.errors}
    assert got == expected
    assert "trucks[0].body.curb_mass" in got["b-bad-field.toml"]
    assert "route.legs[0].file" in got["c-missing-trace.toml"]
    assert "'nowhere.csv' not found" in got["c-missing-trace.toml"]
    assert "not valid TOML" in got["d-not-toml.toml"]
    assert "backwards.csv" in got["e-bad-trace.toml"] and "line 4" in got["e-bad-trace.toml"]
    assert all("\n" not in line for line in got.values())
    # The good ones are complete; nothing of the bad ones and no staging folder is left.
    done = out / "mixed"
    assert sorted(p.name for p in done.iterdir()) == ["good-a", "good-f", "index.json"]
    for slug in ("good-a", "good-f"):
        _same(_without_time(_read(done / slug / "summary.json")),
              _without_time(_alone(folder / f"{'a-good' if slug == 'good-a' else 'f-good'}.toml")))
    index = _read(done / "index.json")
    assert index["counts"] == {"scenarios": 6, "ok": 2, "errors": 4}
    assert index["errors"] == [{"file": f, "error": expected[f]} for f in sorted(expected)]
    assert [r["status"] for r in index["rows"]] == ["ok", "error", "error", "error", "error",
                                                   "ok"]
    assert index["rows"][4]["study"] == "Maravell Freight — Orrin Flats to Tessaly Junction"


def test_duplicate_and_reserved_slugs(tmp_path):
    """A slug already used (also in other letter case) or an index file name is an error;
    the first user of the slug keeps its folder."""
    folder = tmp_path / "dup"
    folder.mkdir()
    _scenario(folder, "a.toml", slug="same", name="First")
    _scenario(folder, "b.toml", slug="same", name="Second")
    _scenario(folder, "c.toml", slug="SAME", name="Third")
    _scenario(folder, "d.toml", slug="index.json", name="Fourth")
    outcome = batch.run_batch(folder, tmp_path / "out", jobs=1, json_only=True)
    assert [s.status for s in outcome.scenarios] == ["ok", "error", "error", "error"]
    b, c, d = outcome.scenarios[1:]
    assert b.error == f"{folder / 'b.toml'}: study.slug: slug 'same' also used by file a.toml"
    assert c.error == f"{folder / 'c.toml'}: study.slug: slug 'SAME' also used by file a.toml"
    assert "index file" in d.error and d.error.startswith(str(folder / "d.toml"))
    assert _read(tmp_path / "out" / "dup" / "same" / "summary.json")["scenario"]["name"] == \
        "First"
    assert sorted(p.name for p in (tmp_path / "out" / "dup").iterdir()) == ["index.json",
                                                                           "same"]


def test_internal_error_in_one_scenario_is_recorded(three, tmp_path, monkeypatch):
    """An unexpected exception in one scenario becomes its error line, not a crash."""
    real = batch._evaluate_and_write

    def flaky(loaded, batch_dir, json_only):
        if loaded.slug == "west":
            raise RuntimeError("boom\nsecond line")
        return real(loaded, batch_dir, json_only)

    monkeypatch.setattr(batch, "_evaluate_and_write", flaky)
    outcome = batch.run_batch(three, tmp_path / "out", jobs=1, json_only=True)
    assert [s.status for s in outcome.scenarios] == ["ok", "error", "ok"]
    assert outcome.scenarios[1].error == \
        f"{three / 'b-west.toml'}: internal error: RuntimeError: boom second line"


def _die_for_west(loaded, batch_dir, json_only):
    if loaded.slug == "west":
        os._exit(3)  # a worker killed outright: no exception, no clean-up
    return _REAL_EVALUATE_AND_WRITE(loaded, batch_dir, json_only)


_REAL_EVALUATE_AND_WRITE = batch._evaluate_and_write


def test_dead_worker_is_recorded_and_the_rest_rerun(three, tmp_path, monkeypatch):
    """A worker process that dies breaks the pool; the lost scenarios run again one by one
    and only the one that kills its process is reported."""
    monkeypatch.setattr(batch, "_START_METHOD", "fork")  # the patch reaches forked workers
    monkeypatch.setattr(batch, "_evaluate_and_write", _die_for_west)
    outcome = batch.run_batch(three, tmp_path / "out", jobs=2, json_only=True)
    assert [s.status for s in outcome.scenarios] == ["ok", "error", "ok"]
    assert outcome.scenarios[1].error == (f"{three / 'b-west.toml'}: internal error: the "
                                          "worker process running this scenario ended "
                                          "unexpectedly")
    done = tmp_path / "out" / "clients"
    assert sorted(p.name for p in done.iterdir()) == ["c-south", "index.json", "north"]


def test_script_without_main_guard_still_completes(three, tmp_path):
    """Workers that cannot start (a calling script without the main guard re-runs itself
    in each worker) make the batch run in the calling process, with a warning, instead of
    reporting every scenario as failed."""
    import subprocess
    import sys

    script = tmp_path / "unguarded.py"
    script.write_text(
        "from tco.batch import run_batch\n"
        f"o = run_batch({str(three)!r}, {str(tmp_path / 'out')!r}, jobs=2, json_only=True)\n"
        "print('RESULT', o.jobs, [s.status for s in o.scenarios])\n", encoding="utf-8")
    repo = str(Path(batch.__file__).resolve().parents[1])
    proc = subprocess.run([sys.executable, str(script)], capture_output=True, text=True,
                          cwd=tmp_path, env={**os.environ, "PYTHONPATH": repo}, timeout=300)
    assert proc.returncode == 0, proc.stderr[-2000:]
    assert "RESULT 1 ['ok', 'ok', 'ok']" in proc.stdout
    assert "worker processes could not start" in proc.stderr


# ---------------------------------------------------------------- batch-level errors -----
def test_batch_level_errors(tmp_path, three):
    with pytest.raises(InputError, match="folder not found"):
        batch.run_batch(tmp_path / "nope", tmp_path / "out")
    empty = tmp_path / "empty"
    empty.mkdir()
    (empty / "notes.txt").write_text("no scenarios here")
    with pytest.raises(InputError, match=r"no scenario files \(\*\.toml\)"):
        batch.run_batch(empty, tmp_path / "out")
    for jobs in (0, -1, 1.5, True):
        with pytest.raises(InputError) as info:
            batch.run_batch(three, tmp_path / "out", jobs=jobs)
        assert info.value.where == "--jobs"
    blocker = tmp_path / "file"
    blocker.write_text("x")
    with pytest.raises(InputError) as info:
        batch.run_batch(three, blocker / "sub")
    assert info.value.where == "--out"
    assert not (tmp_path / "out").exists()


def test_demo_batch_folder():
    """The bundled demo batch: three valid clients with distinct slugs and verdicts apart."""
    files = batch.scenario_files(batch.demo_batch_dir())
    assert len(files) == 3
    loaded = [load_scenario(f) for f in files]
    slugs = [x.slug for x in loaded]
    assert len(set(slugs)) == 3 and "demo" not in slugs
    assert all(x.scenario.uncertainty.draws <= 2000 for x in loaded)
    assert len({x.scenario.study.name for x in loaded}) == 3


# ---------------------------------------------------------------- totals (property) ------
_ROW = st.fixed_dictionaries({
    "status": st.just("ok"),
    "file": st.sampled_from(["a.toml", "b.toml", "c.toml", "d.toml", "e.toml"]),
    "currency": st.sampled_from(["EUR", "USD", "JPY"]),
    "compared_trucks": st.just(1),
    "present_value_difference": st.floats(-1e7, 1e7),
    "truck_cheaper": st.booleans(),
    "avoided_t_co2e": st.one_of(st.none(), st.floats(-1e4, 1e4)),
})


@settings(max_examples=60, deadline=None)
@given(st.lists(_ROW, max_size=12))
def test_totals_never_mix_currencies(rows):
    """Invariant (common practice: amounts in different ISO 4217 currencies are not
    added): each currency's total is the sum of its own rows, and the clients add up."""
    totals = currency_totals(rows)
    by_cur = {t["currency"]: t for t in totals["by_currency"]}
    assert set(by_cur) == {r["currency"] for r in rows}
    for cur, t in by_cur.items():
        mine = [r for r in rows if r["currency"] == cur]
        assert t["clients"] == len(mine)
        assert t["truck_cheaper"] == sum(r["truck_cheaper"] for r in mine)
        assert math.isclose(t["present_value_difference"],
                            math.fsum(r["present_value_difference"] for r in mine),
                            rel_tol=1e-12, abs_tol=1e-6)
    assert totals["all_currencies"]["clients"] == len(rows)
    assert "present_value_difference" not in totals["all_currencies"]


def test_totals_leave_out_clients_with_several_compared_trucks():
    rows = [{"status": "ok", "file": "a.toml", "currency": "EUR", "compared_trucks": 2,
             "present_value_difference": -5.0, "truck_cheaper": True, "avoided_t_co2e": 1.0},
            {"status": "ok", "file": "a.toml", "currency": "EUR", "compared_trucks": 2,
             "present_value_difference": 7.0, "truck_cheaper": False, "avoided_t_co2e": 2.0},
            {"status": "ok", "file": "b.toml", "currency": "EUR", "compared_trucks": 1,
             "present_value_difference": 3.0, "truck_cheaper": False, "avoided_t_co2e": 4.0},
            {"status": "error", "file": "c.toml"}]
    totals = currency_totals(rows)
    assert totals["left_out"] == ["a.toml"]
    assert totals["by_currency"] == [{"currency": "EUR", "clients": 1, "truck_cheaper": 0,
                                      "avoided_t_co2e": 4.0, "present_value_difference": 3.0}]


# ---------------------------------------------------------------- no pool in a pool ------
def _pid() -> str:
    return str(os.getpid())


def test_batch_worker_draws_charts_in_its_own_process(monkeypatch):
    """In a batch worker the report's charts are drawn without a second process pool:
    the worker set-up turns the chart pool off (2 → 1), and every chart job then runs in
    the worker's own process."""
    monkeypatch.setattr(report_context, "CHART_WORKERS", 2)  # restored after the test
    batch._worker_init()
    assert report_context.CHART_WORKERS == 1
    jobs = [report_context._later(_pid) for _ in range(3)]
    assert report_context._draw_all(jobs) == [_pid()] * 3


# ---------------------------------------------------------------- full outputs -----------
class _Tags(HTMLParser):
    def __init__(self):
        super().__init__()
        self.tags: set[str] = set()
        self.hrefs: list[str] = []

    def handle_starttag(self, tag, attrs):
        self.tags.add(tag)
        self.hrefs += [v for k, v in attrs if k in ("href", "src")]


@pytest.mark.slow
def test_full_outputs_index_pdf_and_workbook(tmp_path):
    """Full reports per client, and the index PDF, HTML and workbook: figures equal each
    client's summary.json, a hostile study name stays literal text everywhere, the
    skipped scenario and the cautions are listed."""
    folder = tmp_path / "brokers-run"
    folder.mkdir()
    _scenario(folder, "a.toml", slug="hostile-client", name=HOSTILE_NAME)
    _scenario(folder, "b.toml", slug="dollar-client", name="Dollar client", draws=200,
              replace=(('currency = "EUR"', 'currency = "USD"'),))
    _scenario(folder, "c.toml", slug="bad-one",
              replace=(("diesel = 1.48 ", "diesel = -1 "),))
    bad_line = _error_alone(folder / "c.toml")
    out = tmp_path / "out"

    outcome = batch.run_batch(folder, out, jobs=2)

    done = out / "brokers-run"
    assert [s.status for s in outcome.scenarios] == ["ok", "ok", "error"]
    assert sorted(p.name for p in outcome.index) == ["index.html", "index.json", "index.pdf",
                                                     "index.xlsx"]
    for slug in ("hostile-client", "dollar-client"):
        assert sorted(p.name for p in (done / slug).iterdir()) == [
            "report.html", "report.pdf", "summary.json", "workbook.xlsx"]
    assert not [p for p in out.rglob("*.part")]
    summaries = {s.slug: _read(done / s.slug / "summary.json") for s in outcome.ok}

    # ---- PDF: the text as printed, links only to the clients' own files
    reader = pypdf.PdfReader(str(done / "index.pdf"))
    text = _squash(" ".join(page.extract_text() for page in reader.pages))
    assert _squash("Batch index: brokers-run") in text
    assert _squash("3 scenarios: 2 reported, 1 skipped") in text
    assert _squash(HOSTILE_NAME) in text
    assert _squash(bad_line) in text
    for phrase in ("not financial, tax or legal advice", "ISO 14083", "licensed electricians",
                   "set by local law"):
        assert _squash(phrase) in text
    pv = summaries["dollar-client"]["cashflow"]["comparisons"][0]["present_value_difference"]
    assert _squash(f"{pv:,.0f} USD") in text
    uris = {a.get_object()["/A"]["/URI"] for page in reader.pages
            for a in page.get("/Annots", []) if "/A" in a.get_object()}
    assert uris == {f"{slug}/{name}" for slug in ("hostile-client", "dollar-client")
                    for name in ("report.pdf", "report.html", "workbook.xlsx")}
    assert "/EmbeddedFiles" not in str(reader.trailer["/Root"].get("/Names", {}))

    # ---- HTML: the hostile name is text, not markup
    html = (done / "index.html").read_text(encoding="utf-8")
    parsed = _Tags()
    parsed.feed(html)
    assert "img" not in parsed.tags and "b" not in parsed.tags
    assert "&lt;img src=file:///etc/passwd&gt;" in html
    assert all(not h.startswith(("file:", "http")) for h in parsed.hrefs)

    # ---- workbook: values as in summary.json, text as text, links relative
    wb = openpyxl.load_workbook(done / "index.xlsx")
    assert wb.sheetnames == ["Index", "Totals", "Errors", "Notes"]
    ws = wb["Index"]
    assert ws.freeze_panes == "C2"
    header = [c.value for c in ws[1]]
    rows = [dict(zip(header, r)) for r in ws.iter_rows(min_row=2, values_only=True)]
    assert [r["File"] for r in rows] == ["a.toml", "b.toml", "c.toml"]
    name_cell = ws.cell(row=2, column=header.index("Study") + 1)
    assert name_cell.value == HOSTILE_NAME and name_cell.data_type == "s"
    for r, slug in zip(rows[:2], ("hostile-client", "dollar-client")):
        s = summaries[slug]
        comp = s["cashflow"]["comparisons"][0]
        # openpyxl writes a float to 16 significant digits (a 17-digit value comes back
        # one unit in the last place off), so equal to 1e-15
        assert r["Difference, compared − baseline"] == pytest.approx(
            comp["present_value_difference"], rel=1e-15, abs=0)
        assert r["Present value, compared"] == pytest.approx(
            s["cashflow"]["trucks"][comp["truck"]]["present_value"], rel=1e-15, abs=0)
        assert r["Currency"] == s["scenario"]["currency"]
    diff_col = header.index("Difference, compared − baseline") + 1
    assert '" USD"' in ws.cell(row=3, column=diff_col).number_format
    assert '" EUR"' in ws.cell(row=2, column=diff_col).number_format
    link = ws.cell(row=3, column=header.index("Report") + 1)
    assert link.hyperlink.target == "dollar-client/report.pdf"
    assert rows[1]["P(compared cheaper)"] == \
        summaries["dollar-client"]["uncertainty"]["monte_carlo"]["Electric tractor"][
            "probability_cheaper"]
    assert rows[2]["Status"] == "error" and rows[2]["Error"] == bad_line
    errors = [r for r in wb["Errors"].iter_rows(min_row=2, values_only=True)]
    assert errors == [("c.toml", bad_line)]
    totals = {r[0]: r for r in wb["Totals"].iter_rows(min_row=2, values_only=True) if r[0]}
    assert totals["All currencies"][3] == "not summed across currencies"
    notes = " ".join(str(r[0]) for r in wb["Notes"].iter_rows(values_only=True) if r[0])
    for phrase in ("not financial, tax or legal advice", "GHG Protocol", "ISO 14083",
                   "licensed electricians", "local law"):
        assert phrase in notes


def test_index_cells_show_cost_per_mile_for_us_clients_and_irr_na_briefly():
    # a hand-made row: 1.0 USD/km and 2.0 USD/km in a US-units study read per mile,
    # × 1.609344 km/mi (international mile, NIST SP 811 B.8): 1.609 → 3.219 USD/mi
    from tco.report.batch_index import _context_row

    row = {"status": "ok", "study": "Client", "file": "c.toml", "currency": "USD",
           "units": "us", "truck": "E", "baseline": "D", "battery_new": None,
           "truck_powertrain": "electric", "baseline_powertrain": "diesel",
           "battery_end_of_life": None, "depot_charger_ok": None,
           "probability_cheaper": None, "draws": None, "present_value_baseline": 100.0,
           "present_value_truck": 200.0, "present_value_difference": 100.0,
           "truck_cheaper": False, "levelized_cost_per_km_baseline": 1.0,
           "levelized_cost_per_km_truck": 2.0, "simple_payback_year": None, "irr": -0.6,
           "irr_note": "", "avoided_t_co2e": 10.0, "abatement_cost_per_t_co2e": 10.0,
           "links": {}}
    cells = {c["text"]: c for c in _context_row(row)["cells"]}
    assert "1.609 → 3.219" in cells and cells["1.609 → 3.219"]["note"] == "USD/mi"
    # IRR with no payback: "n/a" in the cell, the reason in its small print
    assert "n/a" in cells and "never recover" in cells["n/a"]["note"]
    metric = dict(row, units="metric", currency="EUR")
    cells = {c["text"]: c for c in _context_row(metric)["cells"]}
    assert cells["1.000 → 2.000"]["note"] == "EUR/km"
