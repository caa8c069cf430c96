"""Hostile and odd input: every case ends with exit 2, one line on stderr, no traceback,
nothing written and earlier outputs untouched.

The cases are written from the classes of problems described for this check (wrong
dimension, absurd values, unbounded time and memory, huge or control-laden text, staging
left behind, files outside the scenario's folder, byte-order marks, misleading messages).
The commands run through :func:`tco.cli.main` in this process (fast) or, for signals, as a
subprocess.
"""
from __future__ import annotations

import copy
import json
import math
import os
import signal
import subprocess
import sys
import time
import tomllib
from pathlib import Path

import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from tco.cli import main
from tco.errors import InputError
from tco.resources import demo_path
from tco.scenario import load_scenario, parse_scenario

ROOT = Path(__file__).resolve().parent.parent
DEMO = tomllib.loads(demo_path().read_text(encoding="utf-8"))
SECRET = "TOP-SECRET-LINE do not echo"


# --------------------------------------------------------------------------- helpers
def _toml_value(v) -> str:
    if isinstance(v, bool):
        return "true" if v else "false"
    if isinstance(v, float):
        if math.isnan(v):
            return "nan"
        if math.isinf(v):
            return "inf" if v > 0 else "-inf"
        return repr(v)
    if isinstance(v, int):
        return str(v)
    if isinstance(v, str):
        return json.dumps(v, ensure_ascii=False)  # a JSON string is a TOML basic string
    if isinstance(v, list):
        return "[" + ", ".join(_toml_value(x) for x in v) + "]"
    if isinstance(v, dict):
        return "{" + ", ".join(f"{json.dumps(k)} = {_toml_value(x)}" for k, x in v.items()) \
            + "}"
    raise TypeError(type(v))


def dump_toml(data: dict) -> str:
    """A minimal TOML writer: every top-level table as inline tables (enough here)."""
    return "".join(f"{json.dumps(k)} = {_toml_value(v)}\n" for k, v in data.items())


def demo() -> dict:
    return copy.deepcopy(DEMO)


def write(folder: Path, data: dict | str, name: str = "case.toml", bom: bool = False) -> Path:
    text = data if isinstance(data, str) else dump_toml(data)
    path = folder / name
    path.write_bytes((b"\xef\xbb\xbf" if bom else b"") + text.encode("utf-8"))
    return path


@pytest.fixture
def out(tmp_path):
    """An output folder holding earlier outputs (sentinels) that must survive."""
    folder = tmp_path / "out"
    for slug in ("demo", "case"):
        (folder / slug).mkdir(parents=True)
        (folder / slug / "summary.json").write_text('{"earlier": true}')
    return folder


def snapshot(folder: Path) -> dict:
    return {str(p.relative_to(folder)): p.read_bytes() if p.is_file() else None
            for p in sorted(folder.rglob("*"))} if folder.exists() else {}


def run_cli(argv, capsys) -> tuple[int, str, str]:
    rc = main([str(a) for a in argv])
    captured = capsys.readouterr()
    return rc, captured.out, captured.err


def assert_refused(argv, capsys, out: Path | None = None, *fragments: str) -> str:
    """Exit 2, exactly one stderr line, no traceback, ``out`` untouched; returns the line."""
    before = snapshot(out) if out is not None else None
    rc, _, err = run_cli(argv, capsys)
    lines = err.splitlines()
    assert rc == 2, err
    assert len(lines) == 1, err
    assert "Traceback" not in err and "internal error" not in err
    assert lines[0].startswith("tco: error: ")
    for f in fragments:
        assert f in lines[0], lines[0]
    if out is not None:
        assert snapshot(out) == before
    return lines[0]


def set_in(data: dict, path: str, value) -> dict:
    """Set ``a.b[0].c`` in a nested dict."""
    keys: list = []
    for part in path.split("."):
        name, _, rest = part.partition("[")
        keys.append(name)
        while rest:
            idx, _, rest = rest.partition("]")
            keys.append(int(idx))
            rest = rest.lstrip("[")
    node = data
    for k in keys[:-1]:
        if isinstance(k, str) and k not in node:
            node[k] = {}
        node = node[k]
    node[keys[-1]] = value
    return data


# --------------------------------------------------------------------------- 1. dimensions
@pytest.mark.parametrize("field, value, unit_given, expected", [
    ("route.legs[0].segments[0].length", "6 %", "%", "km"),
    ("trucks[1].electric.battery_capacity", "560 %", "%", "kWh"),
    ("route.legs[0].payload", "3 percent", "%", "t"),
    ("trucks[0].body.curb_mass", "5 km", "km", "t"),
    ("prices.diesel", "8 %", "%", "1/L"),
    ("finance.discount_rate", "8 km", "km", "'%'"),
])
def test_a_unit_of_the_wrong_dimension_is_one_line(tmp_path, capsys, out, field, value,
                                                   unit_given, expected):
    path = write(tmp_path, set_in(demo(), field, value))
    line = assert_refused(["check", path], capsys, out, field, f"'{unit_given}'", expected)
    assert_refused(["run", path, "--out", out, "--json-only"], capsys, out, field)
    assert "ZeroDivisionError" not in line


# --------------------------------------------------------------------------- 2. bounds
@pytest.mark.parametrize("field, value, fragment", [
    ("finance.discount_rate", 100, "the limit is 100 %"),
    ("finance.inflation", 8.0, "the limit is 100 %"),
    ("prices.escalation.diesel", 100, "the limit is 100 %"),
    ("trucks[0].costs.escalation.tyres", -1.5, "above -100 %"),
    ("trucks[0].costs.purchase_price", math.inf, "finite"),
    ("trucks[0].costs.purchase_price", 1e308, "ceiling"),
    ("trucks[0].costs.registration", 1e308, "ceiling"),
    ("prices.electricity.fixed_fee", math.inf, "finite"),
    ("prices.diesel", 1e20, "ceiling"),
    ("trucks[1].electric.battery_capacity", "1e9 kWh", "at most"),
    ("route.legs[0].segments[0].speed", "900 km/h", "at most 150"),
    ("route.legs[0].payload", "1e6 t", "at most 500"),
    ("trucks[0].diesel.engine_power", "1e7 kW", "at most"),
    ("depot.chargers", 10**12, "less than or equal"),
    ("emissions.grid_intensity", "1e6 g/kWh", "at most"),
])
def test_absurd_values_are_refused_by_check_and_run(tmp_path, capsys, out, field, value,
                                                    fragment):
    path = write(tmp_path, set_in(demo(), field, value))
    assert_refused(["check", path], capsys, out, field, fragment)
    assert_refused(["run", path, "--out", out, "--json-only"], capsys, out, field)


def test_a_value_outside_the_usual_range_is_a_warning_not_an_error(tmp_path, capsys):
    path = write(tmp_path, set_in(demo(), "finance.discount_rate", 0.45))
    rc, stdout, err = run_cli(["check", path], capsys)
    assert rc == 0, err
    assert "warning: finance.discount_rate = 0.45 is outside the usual range" in stdout


def test_check_refuses_what_run_refuses(tmp_path, capsys, out):
    """A missing diesel price used to pass `check` (traces only) and fail `run`."""
    data = demo()
    del data["prices"]["diesel"]
    path = write(tmp_path, data)
    line = assert_refused(["check", path], capsys, out)
    assert "diesel" in line


def _gpx(points) -> str:
    pts = "".join(f'<trkpt lat="{la}" lon="{lo}"><ele>100</ele>'
                  f"<time>2026-01-01T08:00:{k:02d}Z</time></trkpt>"
                  for k, (la, lo) in enumerate(points))
    return ('<?xml version="1.0" encoding="UTF-8"?><gpx version="1.1" creator="test" '
            'xmlns="http://www.topografix.com/GPX/1/1"><trk><trkseg>' + pts +
            "</trkseg></trk></gpx>")


def _with_trace(data: dict, name: str) -> dict:
    leg = data["route"]["legs"][0]
    leg.pop("segments")
    leg["file"] = name
    return data


@pytest.mark.parametrize("points, fragment", [
    ([(45.0, 7.0), (1000.0, 7.0), (45.0, 7.0)], "latitude"),
    ([(45.0, 7.0), (45.0, 700.0), (45.0, 7.0)], "longitude"),
    # 0.1 degree of latitude (about 11 km) in one second: about 40,000 km/h
    ([(45.0, 7.0), (45.1, 7.0), (45.1001, 7.0)], "more than a truck can reach"),
])
def test_gpx_points_off_the_globe_or_too_fast(tmp_path, capsys, out, points, fragment):
    (tmp_path / "t.gpx").write_text(_gpx(points))
    path = write(tmp_path, _with_trace(demo(), "t.gpx"))
    line = assert_refused(["check", path], capsys, out, fragment)
    assert "t.gpx" in line


# --------------------------------------------------------------------------- 3. budgets
@pytest.mark.parametrize("field, value, fragment", [
    # two samples a stop at least: 2e9 samples x 600 bytes = 1.2e12 bytes = 1.1 TiB
    ("route.legs[0].segments[0].stops", 1e9, "1,000,000,000 stops would need at least "
     "2,000,000,000 samples, about 1.1 TiB; the limit is 3,000,000 samples"),
    ("route.time_step", "0.0001 s", "samples at 0.0001 s"),
    # 6e10 s at the longest step, 10 s: 6e9 samples x 600 bytes = 3.6e12 bytes = 3.3 TiB
    ("route.legs[0].dwell_end", "1e9 min", "would need at least 6,000,000,000 samples, about "
     "3.3 TiB; "
     "the limit is 3,000,000 samples"),
    # below the stop limit, but the leg's time is over the budget at the demo's 1 s step
    ("route.legs[0].segments[0].stops", 1_000_000, "samples at 1 s"),
    ("uncertainty.draws", 10**9, "the limit is 1,000,000 draws"),
])
def test_runs_too_big_are_refused_before_building(tmp_path, capsys, out, field, value,
                                                  fragment):
    path = write(tmp_path, set_in(demo(), field, value))
    t0 = time.perf_counter()
    assert_refused(["check", path], capsys, out, fragment)
    assert_refused(["run", path, "--out", out, "--json-only"], capsys, out, fragment)
    assert time.perf_counter() - t0 < 120  # not a speed check: a guard against a hang


def test_the_sample_budget_names_the_size_and_the_limit(tmp_path, capsys):
    path = write(tmp_path, set_in(demo(), "route.time_step", "0.0001 s"))
    line = assert_refused(["check", path], capsys)
    # first leg: 85 km at 40–85 km/h plus 40 min at the dock is far above 3e6 samples at
    # 0.1 ms (1 h alone is 3.6e7); the message states the size in bytes and the limit
    assert "GiB" in line and "the limit is 3,000,000 samples" in line


def test_draws_option_is_capped_like_the_scenario(tmp_path, capsys, out):
    assert_refused(["run", demo_path(), "--draws", "1000000000", "--out", out,
                    "--json-only"], capsys, out, "--draws", "the limit is 1,000,000")
    assert_refused(["run", demo_path(), "--draws", "-1", "--out", out, "--json-only"],
                   capsys, out, "--draws")


@pytest.mark.parametrize("command", ["check", "run"])
def test_csv_whose_clock_jumps_a_billion_seconds(tmp_path, capsys, out, command):
    (tmp_path / "t.csv").write_text("time [s],speed [km/h],grade [%]\n0,0,0\n10,30,0\n"
                                    "1000000000,30,0\n1000000010,0,0\n")
    path = write(tmp_path, _with_trace(demo(), "t.csv"))
    argv = [command, path] + (["--out", out, "--json-only"] if command == "run" else [])
    assert_refused(argv, capsys, out, "samples", "t.csv")


@pytest.mark.parametrize("text", [
    "x = " + "[" * 5000 + "]" * 5000 + "\n",
    "x = " + "{a = " * 3000 + "1" + "}" * 3000 + "\n",
])
def test_toml_nested_thousands_deep(tmp_path, capsys, out, text):
    path = write(tmp_path, text)
    assert_refused(["check", path], capsys, out)
    assert_refused(["run", path, "--out", out, "--json-only"], capsys, out)


# --------------------------------------------------------------------------- 4. text
@pytest.mark.parametrize("field, value, fragment", [
    ("study.notes", "word " * 200_000, "the limit is 20,000"),
    ("trucks[0].name", "T" * 100_000, "the limit is 80"),
    ("study.name", "N" * 5_000, "the limit is 200"),
    ("route.legs[0].name", "L" * 1_000, "the limit is 80"),
])
def test_huge_text_is_refused_quickly(tmp_path, capsys, out, field, value, fragment):
    path = write(tmp_path, set_in(demo(), field, value))
    line = assert_refused(["check", path], capsys, out, field, fragment)
    assert len(line) < 700


@pytest.mark.parametrize("data", [
    # a line break inside an unknown key and inside an echoed value
    lambda d: set_in(d, "study.na\nme", 1),
    lambda d: set_in(d, "study.currency", "EU\nR"),
    lambda d: set_in(d, "study.slug", "demo\x1b[2J\x1b[31m"),
    lambda d: set_in(d, "emissions.diesel_factors", "nope\r\n\x07\x00"),
])
def test_every_error_is_one_line_without_control_characters(tmp_path, capsys, out, data):
    path = write(tmp_path, data(demo()))
    line = assert_refused(["check", path], capsys, out)
    assert not any(ord(c) < 32 or 0x7f <= ord(c) < 0xa0 for c in line), repr(line)


def test_control_characters_never_reach_outputs_or_the_terminal(tmp_path, capsys):
    data = set_in(demo(), "trucks[1].name", "Electric\x00\x1b[31m\x07 tractor")
    data = set_in(data, "study.notes", "first line\nsecond\x1b]0;title\x07 line")
    data["uncertainty"]["draws"] = 0
    path = write(tmp_path, data)
    rc, stdout, err = run_cli(["run", path, "--out", tmp_path / "o", "--json-only"], capsys)
    assert rc == 0, err
    text = (tmp_path / "o" / "demo" / "summary.json").read_text(encoding="utf-8")
    summary = json.loads(text)
    names = [t["name"] for t in summary["trucks"]] if isinstance(summary.get("trucks"), list) \
        else list(summary.get("trucks", {}))
    for s in [stdout, err, json.dumps(summary, ensure_ascii=False), *names]:
        assert not any(c in s for c in "\x00\x1b\x07"), repr(s)[:200]
    assert "Electric\ufffd\ufffd[31m\ufffd tractor" in text


def test_names_in_other_scripts_are_kept(tmp_path):
    data = set_in(demo(), "trucks[1].name", "שלום 🚚 مرحبا")
    s = parse_scenario(data)
    assert s.trucks[1].name == "שלום 🚚 مرحبا"


# --------------------------------------------------------------------------- 5. staging
def test_a_run_removes_staging_folders_left_by_dead_runs(tmp_path, capsys):
    out = tmp_path / "o"
    out.mkdir()
    dead = subprocess.run([sys.executable, "-c", "import os; print(os.getpid())"],
                          capture_output=True, text=True).stdout.strip()
    stale = out / f".demo.{dead}.abcd1234.part"
    stale.mkdir()
    (stale / "report.pdf").write_bytes(b"x" * 1000)
    mine = out / f".demo.{os.getpid()}.live0000.part"  # a live process: left alone
    mine.mkdir()
    other = out / ".notes.txt"
    other.write_text("keep")
    data = demo()
    data["uncertainty"]["draws"] = 0
    path = write(tmp_path, data, name="demo.toml")
    rc, _, err = run_cli(["run", path, "--out", out, "--json-only"], capsys)
    assert rc == 0, err
    assert not stale.exists()
    assert mine.exists() and other.read_text() == "keep"


def test_a_renderer_crash_leaves_no_staging_folder(tmp_path, capsys, monkeypatch, out):
    import tco.report.pdf as pdf

    def crash(*a, **k):
        raise MemoryError("renderer")

    monkeypatch.setattr(pdf, "render_pdf", crash)
    data = demo()
    data["uncertainty"]["draws"] = 0
    path = write(tmp_path, data, name="demo.toml")
    before = snapshot(out)
    rc, _, err = run_cli(["run", path, "--out", out], capsys)
    assert rc == 1 and len(err.splitlines()) == 1
    assert snapshot(out) == before
    assert not list(out.glob(".*.part"))


def _terminate_run(out: Path, when) -> tuple[int, str]:
    """Start ``tco run`` into ``out`` with an earlier summary there, send SIGTERM at
    ``when`` (seconds after the start, or "stage": once its staging folder exists), and
    return its exit code and stderr."""
    (out / "demo").mkdir(parents=True)
    (out / "demo" / "summary.json").write_text("earlier")
    env = {**os.environ, "PYTHONPATH": str(ROOT)}
    proc = subprocess.Popen([sys.executable, "-m", "tco", "run", "--out", str(out),
                             "--quiet"], stdout=subprocess.PIPE, stderr=subprocess.PIPE,
                            text=True, env=env)
    if when == "stage":
        deadline = time.time() + 120
        while time.time() < deadline and not list(out.glob(".demo.*.part")):
            time.sleep(0.05)  # wait until the run is writing
    else:
        time.sleep(when)
    proc.send_signal(signal.SIGTERM)
    _, err = proc.communicate(timeout=120)
    return proc.returncode, err


@pytest.mark.slow
@pytest.mark.parametrize("when", ["stage", 1.0, 3.0])
def test_sigterm_is_handled_like_ctrl_c(tmp_path, when):
    """Whenever SIGTERM lands, the output folder is all previous or all new, never mixed,
    no staging folder is left, and stderr says which (one line)."""
    out = tmp_path / "o"
    code, err = _terminate_run(out, when)
    files = sorted(p.name for p in (out / "demo").iterdir())
    previous = (out / "demo" / "summary.json").read_text() == "earlier"
    if previous:
        assert files == ["summary.json"]
        assert code == 143, err
        assert err.splitlines() == ["tco: terminated; previous outputs left as they were"]
    else:  # the signal came after the outputs were put in place
        assert {"summary.json", "report.pdf", "report.html", "workbook.xlsx"} <= set(files)
        # 143 through the handler (it names what was written), or killed by the default
        # action once the command had restored it on its way out (a shell shows 143 too),
        # or 0 if the run ended before the signal arrived
        assert code in (143, -signal.SIGTERM, 0), err
        if code == 143:
            assert len(err.splitlines()) == 1
            assert err.startswith("tco: terminated after writing ") and "in full" in err
    assert not list(out.glob(".*.part"))
    assert not list((out / "demo").glob(".*.part"))


def test_signals_held_delays_an_interruption_until_the_block_ends():
    """A SIGTERM raised inside atomic.signals_held is delivered after the block: every
    statement of the block runs (the final moves of a staged output are never cut)."""
    from tco.report.atomic import signals_held

    class Stop(Exception):
        pass

    def handler(signum, frame):
        raise Stop()

    previous = signal.signal(signal.SIGTERM, handler)
    done = []
    try:
        with pytest.raises(Stop):
            with signals_held():
                os.kill(os.getpid(), signal.SIGTERM)
                done.append("after the signal")
        assert done == ["after the signal"]
    finally:
        signal.signal(signal.SIGTERM, previous)


# --------------------------------------------------------------------------- 6. files
def _outside(tmp_path) -> Path:
    far = tmp_path / "elsewhere"
    far.mkdir()
    f = far / "secret.csv"
    f.write_text(f"{SECRET}\n{SECRET}\n")
    return f


@pytest.mark.parametrize("field", ["emissions.factor_file", "emissions.hourly_profile_file"])
@pytest.mark.parametrize("how", ["relative", "absolute", "symlink"])
def test_named_files_stay_in_the_scenario_folder(tmp_path, capsys, out, field, how):
    secret = _outside(tmp_path)
    folder = tmp_path / "scen"
    folder.mkdir()
    if how == "relative":
        name = "../elsewhere/secret.csv"
    elif how == "absolute":
        name = str(secret)
    else:
        (folder / "link.csv").symlink_to(secret)
        name = "link.csv"
    path = write(folder, set_in(demo(), field, name))
    line = assert_refused(["check", path], capsys, out, field, "outside the scenario's folder")
    assert SECRET not in line
    # allowed explicitly: the file is read (and then fails as a table), still no contents
    rc, _, err = run_cli(["check", path, "--allow-folder", secret.parent], capsys)
    assert rc == 2 and "outside" not in err and SECRET not in err


@pytest.mark.parametrize("how", ["symlink", "relative"])
def test_trace_files_stay_in_the_scenario_folder(tmp_path, capsys, out, how):
    secret = _outside(tmp_path)
    folder = tmp_path / "scen"
    folder.mkdir()
    if how == "symlink":
        (folder / "t.csv").symlink_to(secret)
        name = "t.csv"
    else:
        name = "../elsewhere/secret.csv"
    path = write(folder, _with_trace(demo(), name))
    line = assert_refused(["check", path], capsys, out, "outside the scenario's folder")
    assert SECRET not in line


@pytest.mark.parametrize("field, name", [
    ("emissions.factor_file", "table.txt"),
    ("emissions.hourly_profile_file", "profile.json"),
])
def test_named_files_need_the_expected_extension(tmp_path, capsys, out, field, name):
    (tmp_path / name).write_text(SECRET)
    path = write(tmp_path, set_in(demo(), field, name))
    line = assert_refused(["check", path], capsys, out, field, ".csv")
    assert SECRET not in line


@pytest.mark.parametrize("content", [
    f"{SECRET}\n1,2,3\n",                        # unknown header
    "time [s],speed [km/h],grade [%]\n0,0,0\n1," + SECRET + ",0\n",  # a bad cell
    "time [s],speed [" + SECRET + "],grade [%]\n0,0,0\n1,5,0\n",     # a bad unit
])
def test_trace_errors_name_row_and_column_never_contents(tmp_path, capsys, out, content):
    (tmp_path / "t.csv").write_text(content)
    path = write(tmp_path, _with_trace(demo(), "t.csv"))
    line = assert_refused(["check", path], capsys, out, "t.csv")
    assert SECRET not in line


def test_profile_and_factor_errors_never_quote_contents(tmp_path, capsys, out):
    (tmp_path / "p.csv").write_text("value\n" + "\n".join(["1"] * 5) + f"\n{SECRET}\n")
    path = write(tmp_path, set_in(demo(), "emissions.hourly_profile_file", "p.csv"))
    line = assert_refused(["check", path], capsys, out, "row 7")
    assert SECRET not in line
    (tmp_path / "f.csv").write_text("set,quantity,value,unit,source,year\n"
                                    f"x,diesel.co2,{SECRET},kg/L,s,2024\n")
    path = write(tmp_path, set_in(demo(), "emissions.factor_file", "f.csv"))
    line = assert_refused(["check", path], capsys, out, "row 2, column value")
    assert SECRET not in line


# --------------------------------------------------------------------------- 7. BOM
def test_toml_with_a_byte_order_mark_is_read(tmp_path):
    text = demo_path().read_text(encoding="utf-8")
    path = write(tmp_path, text, bom=True)
    assert load_scenario(path).scenario.study.name == DEMO["study"]["name"]


def test_csv_trace_and_profile_with_a_byte_order_mark(tmp_path, capsys):
    (tmp_path / "t.csv").write_bytes(
        b"\xef\xbb\xbftime [s],speed [km/h],grade [%]\r\n0,0,0\r\n"
        + b"".join(f"{k},{min(50, 5 * k)},0\r\n".encode() for k in range(1, 200))
        + b"200,0,0\r\n")
    (tmp_path / "p.csv").write_bytes(b"\xef\xbb\xbf" + "\r\n".join(["1"] * 24).encode())
    data = _with_trace(demo(), "t.csv")
    data["emissions"] = {**data.get("emissions", {}), "hourly_profile_file": "p.csv"}
    path = write(tmp_path, data)
    rc, _, err = run_cli(["check", path], capsys)
    assert rc == 0, err


# --------------------------------------------------------------------------- 8. messages
def test_trace_path_that_is_a_folder_says_so(tmp_path, capsys, out):
    (tmp_path / "t.csv").mkdir()
    path = write(tmp_path, _with_trace(demo(), "t.csv"))
    assert_refused(["check", path], capsys, out, "is a folder")


def test_very_long_segment_names_the_length(tmp_path, capsys, out):
    path = write(tmp_path, set_in(demo(), "route.legs[0].segments[0].length", "1e7 km"))
    line = assert_refused(["check", path], capsys, out, "segments[0].length", "at most 5,000 km")
    assert "speed is zero" not in line


def test_many_stops_close_together_are_driven(tmp_path, capsys):
    """10,000 stops on 6 km (0.6 m apart) used to say 'the speed is zero … near 0 m'."""
    data = set_in(demo(), "route.legs[0].segments[0].stops", 10_000)
    data = set_in(data, "route.legs[0].segments[0].dwell", "0 s")
    s = parse_scenario(data)
    from tco.pipeline import build_traces
    from tco.scenario import LoadedScenario

    legs = build_traces(LoadedScenario(s, None, data, ""))
    assert legs[0]["speed"].max() > 0


def test_a_misspelt_distribution_input_is_named_at_the_distribution(tmp_path, capsys, out):
    """The demo correlates prices.diesel; a misspelt distribution input used to be reported
    at the correlation, naming the correct input."""
    data = demo()
    data["uncertainty"]["distributions"][0]["input"] = "prices.diesl"
    path = write(tmp_path, data)
    line = assert_refused(["check", path], capsys, out,
                          "uncertainty.distributions[0].input", "'prices.diesl'",
                          "did you mean 'prices.diesel'")
    assert "correlations" not in line
    assert_refused(["run", path, "--out", out, "--json-only"], capsys, out,
                   "uncertainty.distributions[0].input")


def test_a_misspelt_correlation_input_is_named_at_the_correlation(tmp_path, capsys, out):
    data = demo()
    data["uncertainty"]["correlations"][0]["inputs"][0] = "prices.diesle"
    path = write(tmp_path, data)
    line = assert_refused(["check", path], capsys, out, "uncertainty.correlations[0]",
                          "'prices.diesle' has no distribution",
                          "did you mean 'prices.diesel', the input of distributions[0]")
    assert "distributions[0].input" not in line
    # far from every distribution input: refused by the schema, before any model runs
    data["uncertainty"]["correlations"][0]["inputs"][0] = "finance.inflation"
    with pytest.raises(InputError, match=r"correlations.*\[0\]: 'finance.inflation' has no "
                       "distribution"):
        parse_scenario(data)


def test_paths_in_errors_are_as_the_user_gave_them(tmp_path, capsys, monkeypatch, out):
    monkeypatch.chdir(tmp_path)
    (tmp_path / "sub").mkdir()
    (tmp_path / "sub" / "t.csv").write_text("time [s],speed [km/h],grade [%]\n0,0,0\n1,x,0\n")
    write(tmp_path / "sub", _with_trace(demo(), "t.csv"))
    line = assert_refused(["check", "sub/case.toml"], capsys, out)
    assert line.startswith("tco: error: sub/t.csv: ") and str(tmp_path) not in line
    data = set_in(demo(), "prices.diesel", "8 %")
    write(tmp_path / "sub", data, name="b.toml")
    line = assert_refused(["check", "sub/b.toml"], capsys, out)
    assert line.startswith("tco: error: sub/b.toml: ")


# --------------------------------------------------------------------------- hypothesis
def _leaves(node, prefix=""):
    """Paths of every value of a scenario dict: tables, lists and scalars."""
    if prefix:
        yield prefix
    if isinstance(node, dict):
        for k, v in node.items():
            yield from _leaves(v, f"{prefix}.{k}" if prefix else k)
    elif isinstance(node, list) and node and all(isinstance(v, dict) for v in node):
        for i, v in enumerate(node):
            yield from _leaves(v, f"{prefix}[{i}]")


LEAVES = sorted(set(_leaves(DEMO)))
WRONG = st.one_of(
    st.booleans(), st.integers(min_value=-(2**70), max_value=2**70),
    st.floats(allow_nan=True, allow_infinity=True),
    st.text(max_size=30),
    st.sampled_from(["6 %", "560 %", "1e308 km", "inf km", "nan", "-0 s", "12 kg", "3 km/h",
                     "5 $", "1e9 min", "0.0001 s", "-1e308", "1 / gal", "10 degC", "", " ",
                     "\x00", "a\nb", "%", "km", "1e400 t", "2**2000"]),
    st.lists(st.integers(-5, 30), max_size=4),
    st.dictionaries(st.text(max_size=5), st.integers(), max_size=2),
    st.lists(st.dictionaries(st.text(max_size=5), st.floats(), max_size=2), max_size=2),
)


@settings(max_examples=300, deadline=None,
          suppress_health_check=[HealthCheck.function_scoped_fixture,
                                 HealthCheck.too_slow])
@given(st.lists(st.tuples(st.sampled_from(LEAVES), WRONG), min_size=1, max_size=3))
def test_wrong_values_give_input_error_or_success(tmp_path, changes):
    """Random wrong-type and wrong-dimension values: InputError or success, nothing else."""
    data = demo()
    for field, value in changes:
        try:
            set_in(data, field, value)
        except (LookupError, TypeError):  # an earlier change replaced the parent table
            pass
    path = tmp_path / "h.toml"
    try:
        path.write_text(dump_toml(data), encoding="utf-8")
    except UnicodeEncodeError:  # lone surrogates cannot be written as UTF-8 at all
        return
    try:
        load_scenario(path)
    except InputError as exc:
        assert "\n" not in exc.line()


def test_templates_print_no_control_characters():
    from markupsafe import Markup

    from tco.report.html import environment

    env = environment()
    out = env.from_string("{{ a }}|{{ b }}|{{ c }}").render(
        a="x\x1b[31m<y>\x00", b=Markup("<b>\x07</b>"), c=3)
    assert out == "x\ufffd[31m&lt;y&gt;\ufffd|<b>\ufffd</b>|3"


def test_batch_file_names_and_errors_are_cleaned():
    from tco.batch import ScenarioOutcome

    o = ScenarioOutcome("a\x1b[2Jb.toml", "error", error="first\nsecond\x07")
    assert o.file == "a\ufffd[2Jb.toml" and o.error == "first\\nsecond\ufffd"


NAMES_WITH_EMOJI_AND_RTL = "חשמלי 🚚 كهربائي ✓ 🚛"


def test_chart_fonts_have_every_character_of_emoji_and_rtl_names():
    """The charts' font list has a glyph for each character (DejaVu Sans: Hebrew, Arabic,
    ✓; Symbola, Debian package fonts-symbola, installed by .ci/run: the emoji), so a chart
    drawn with such a name raises no missing-glyph warning even with the warning filter
    of tco.report.charts turned off."""
    import warnings

    from matplotlib import font_manager
    from matplotlib.ft2font import FT2Font

    from tco.report.charts import chart_style, font_families, new_figure

    fonts = [FT2Font(font_manager.findfont(f, fallback_to_default=False))
             for f in font_families()]
    missing = [c for c in NAMES_WITH_EMOJI_AND_RTL
               if c != " " and not any(f.get_char_index(ord(c)) for f in fonts)]
    assert missing == [], f"no chart font has {missing} (fonts: {font_families()})"

    import io

    with warnings.catch_warnings(record=True) as caught:
        warnings.resetwarnings()
        warnings.simplefilter("always")
        with chart_style():
            fig, axes = new_figure(1.5)
            ax = axes[0, 0]
            ax.set_title(NAMES_WITH_EMOJI_AND_RTL)
            ax.bar([NAMES_WITH_EMOJI_AND_RTL, "Diesel"], [1.0, 2.0])
            fig.savefig(io.BytesIO(), format="png")  # Agg draws every glyph
    glyph = [str(w.message) for w in caught if "missing from" in str(w.message)]
    assert glyph == []


@pytest.mark.slow
def test_full_report_with_emoji_rtl_and_control_characters(tmp_path):
    """Every output of a run whose names hold emoji, right-to-left text and control
    characters: no glyph warnings on the terminal (even with --quiet), no control
    characters in HTML, PDF text, workbook or JSON."""
    data = set_in(demo(), "trucks[1].name", "חשמלי 🚚 كهربائي\x1b[31m\x07")
    data = set_in(data, "study.name", "Study \x00 ✓ 🚛")
    data["uncertainty"]["draws"] = 200
    path = write(tmp_path, data)
    out = tmp_path / "o"
    env = {**os.environ, "PYTHONPATH": str(ROOT), "PYTHONWARNINGS": "default"}
    proc = subprocess.run([sys.executable, "-m", "tco", "run", str(path), "--out", str(out),
                           "--quiet"], capture_output=True, text=True, env=env, timeout=600)
    assert proc.returncode == 0, proc.stderr
    assert proc.stderr == "", proc.stderr[:500]
    folder = out / "demo"
    html = (folder / "report.html").read_text(encoding="utf-8")
    assert "\x1b" not in html and "\x07" not in html and "\x00" not in html
    assert "חשמלי 🚚 كهربائي" in html
    # the text reaches the PDF as text (poppler's pdftotext), the emoji from a font that has
    # it (Symbola, from fonts-symbola; pdffonts lists the embedded fonts)
    pdf = subprocess.run(["pdftotext", str(folder / "report.pdf"), "-"], capture_output=True,
                         text=True, check=True).stdout
    for word in ("חשמלי", "🚚", "كهربائي", "✓", "🚛"):
        assert word in pdf, word
    fonts = subprocess.run(["pdffonts", str(folder / "report.pdf")], capture_output=True,
                           text=True, check=True).stdout
    assert "Symbola" in fonts
    summary = (folder / "summary.json").read_text(encoding="utf-8")
    assert "\\u001b" not in summary and "\\u0007" not in summary
    import openpyxl

    wb = openpyxl.load_workbook(folder / "workbook.xlsx")
    for ws in wb.worksheets:
        for row in ws.iter_rows(values_only=True):
            for v in row:
                if isinstance(v, str):
                    assert not any(ord(c) < 32 and c not in "\n\t" for c in v), v


def test_fleet_cycles_stay_in_the_fleet_folder(tmp_path, capsys, out):
    from tco.resources import inputs_dir

    src = inputs_dir() / "fleet"
    secret = _outside(tmp_path)
    folder = tmp_path / "fl"
    folder.mkdir()
    (folder / "c.csv").symlink_to(secret)
    (folder / "fleet.csv").write_text("vehicle,cycle,current,candidate\n"
                                      "V1,c.csv,Diesel tractor,Electric tractor\n")
    line = assert_refused(["fleet", folder / "fleet.csv", "--base", src / "base.toml",
                           "--out", out, "--json-only"], capsys, out,
                          "row 2, cycle", "outside the scenario's folder")
    assert SECRET not in line


@pytest.mark.parametrize("argv", [
    ["run", "--draws", "abc"],
    ["frob"],
    ["fleet", "--rule", "nope\x1b[31m"],
    ["check"],
])
def test_bad_arguments_are_one_line(capsys, argv):
    with pytest.raises(SystemExit) as info:
        main(argv)
    err = capsys.readouterr().err
    assert info.value.code == 2
    assert len(err.splitlines()) == 1 and err.startswith("tco: error: ")
    assert "\x1b" not in err


# --------------------------------------------------------------------------- whole-run budgets
def test_a_fleet_of_too_many_vehicles_is_refused_before_any_row_runs(tmp_path, capsys, out):
    from tco import budget
    from tco.resources import inputs_dir

    src = inputs_dir() / "fleet"
    folder = tmp_path / "fl"
    folder.mkdir()
    (folder / "c.csv").write_text("time [s],speed [km/h]\n0,0\n60,50\n120,0\n")
    n = budget.MAX_FLEET_ROWS + 1
    rows = "".join(f"V{i},c.csv,Diesel tractor,Electric tractor\n" for i in range(n))
    (folder / "fleet.csv").write_text("vehicle,cycle,current,candidate\n" + rows)
    t0 = time.perf_counter()
    line = assert_refused(["fleet", folder / "fleet.csv", "--base", src / "base.toml",
                           "--out", out, "--json-only"], capsys, out,
                          "10,001 vehicles would keep about",
                          "the limit is 10,000 vehicles", "split the fleet file")
    # 10,001 x 200,000 bytes = 2.0e9 bytes = 1.9 GiB (2**30 bytes to a GiB)
    assert "1.9 GiB" in line
    assert time.perf_counter() - t0 < 120  # refused before simulating: a guard, not a speed check


def test_fleet_workers_are_held_to_the_memory_budget():
    from tco import budget

    # 8 GiB = 8,589,934,592 bytes; 1,000 rows keep 2e8; a trip of 3e6 samples takes
    # 200 MiB + 3e6 x 600 = 2,009,715,200 bytes: (8,589,934,592 - 2e8) // 2,009,715,200 = 4
    assert budget.fleet_workers(1000, 16, 3e6) == 4
    assert budget.fleet_workers(1000, 2, 3e6) == 2
    # a small trip (the demo fleet's largest, about 23,000 samples) leaves 16 cores free;
    # on 64: 200 MiB + 23,000 x 600 = 223,515,200 bytes a worker,
    # (8,589,934,592 - 12 x 200,000) // 223,515,200 = 38 workers
    assert budget.fleet_workers(12, 16, 23_000) == 16
    assert budget.fleet_workers(12, 64, 23_000) == 38
    assert budget.fleet_problem(12, 23_000) is None


def test_batch_workers_are_as_many_as_fit_the_memory_budget():
    from tco import budget

    gib = 2**30
    assert budget.workers_for([3 * gib, 3 * gib, 3 * gib], 4) == 2  # 6 GiB fits, 9 does not
    assert budget.workers_for([10 * gib], 4) == 1  # never fewer than one
    assert budget.workers_for([0.3 * gib] * 8, 16) == 8


def test_a_batch_folder_of_too_many_scenarios_is_refused_before_reading_them(tmp_path,
                                                                               capsys, out):
    from tco import budget

    folder = tmp_path / "many"
    folder.mkdir()
    for i in range(budget.MAX_BATCH_SCENARIOS + 1):
        (folder / f"s{i:05d}.toml").write_text("not read")
    assert_refused(["batch", folder, "--out", out, "--json-only"], capsys, out,
                   "10,001 scenario files", "the limit is 10,000 scenarios")


def test_a_telematics_partition_too_big_is_refused_from_its_metadata(tmp_path, monkeypatch):
    """The row count comes from the Parquet footer, before any column is read. (The limit
    is lowered here: a partition of 43 million rows is too big for a test.)"""
    import pandas as pd
    import pyarrow as pa
    import pyarrow.parquet as pq

    from tco import budget
    from tco import telematics as tm

    monkeypatch.setattr(budget, "MAX_PARTITION_ROWS", 10)
    path = tmp_path / "d" / "p.parquet"
    path.parent.mkdir()
    df = pd.DataFrame({"vehicle": "A", "timestamp": pd.date_range("2030-01-01", periods=11,
                                                                  freq="s"),
                       "speed": 1.0, "payload": 0.0, "elevation": 0.0})
    pq.write_table(pa.Table.from_pandas(df, preserve_index=False), path)
    with pytest.raises(InputError) as info:
        tm.process_partition(path, load_scenario(demo_path()).scenario)
    # 11 rows x 200 bytes = 2,200 bytes = 2.1 KiB (1,024 bytes to a KiB)
    assert str(info.value).count("\n") == 0
    assert "has 11 rows and would need about 2.1 KiB; the limit is 10 rows" in \
        info.value.message
    assert str(info.value.file) == str(path)


def test_telematics_errors_name_the_paths_as_the_user_gave_them(tmp_path, capsys, monkeypatch,
                                                                out):
    import pandas as pd
    import pyarrow as pa
    import pyarrow.parquet as pq

    monkeypatch.chdir(tmp_path)
    df = pd.DataFrame({"vehicle": "A", "timestamp": pd.date_range("2030-01-01", periods=30,
                                                                  freq="s"),
                       "speed": -1.0, "payload": 0.0, "elevation": 0.0})
    (tmp_path / "d" / "day=1").mkdir(parents=True)
    pq.write_table(pa.Table.from_pandas(df, preserve_index=False),
                   tmp_path / "d" / "day=1" / "bad.parquet")
    line = assert_refused(["telematics", "d", "--out", out], capsys, out)
    assert line.startswith("tco: error: d/day=1/bad.parquet: speed: ")
    assert str(tmp_path) not in line
    (tmp_path / "logs").mkdir()
    (tmp_path / "logs" / "vehicle_days.csv").write_text("vehicle,truck\nx,y\n")
    from tco.resources import inputs_dir

    src = inputs_dir() / "fleet"
    line = assert_refused(["fleet", src / "fleet.csv", "--base", src / "base.toml",
                           "--telematics", "logs", "--out", out, "--json-only"], capsys, out)
    assert line.startswith("tco: error: logs/vehicle_days.csv: ")


def test_plan_files_with_a_byte_order_mark_deep_nesting_or_bad_bytes(tmp_path):
    from tco.plan import load_plan_settings

    path = tmp_path / "plan.toml"
    path.write_bytes(b"\xef\xbb\xbf[plan]\nservice_life = 12\n")  # as some editors save it
    assert load_plan_settings(path).service_life == pytest.approx(12 * 365.25 * 86400)
    path.write_text("x = " + "[" * 5000 + "]" * 5000 + "\n")
    with pytest.raises(InputError, match="nested too deeply"):
        load_plan_settings(path)
    path.write_bytes(b"[plan]\nservice_life = \xff\n")
    with pytest.raises(InputError, match="not a UTF-8 text file"):
        load_plan_settings(path)
    path.write_text("[plan]\nearliest_year = 3000\n")
    with pytest.raises(InputError, match="plan.earliest_year: .*between 1990 and 2100"):
        load_plan_settings(path)
