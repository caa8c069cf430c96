"""The command line: exit codes, one-line errors, nothing half-written."""
import json
import subprocess
import sys

import pytest

from tco import __version__
from tco.cli import main
from tco.resources import demo_path


def run(capsys, *argv):
    code = main(list(argv))
    out, err = capsys.readouterr()
    return code, out, err


def test_version_and_help(capsys):
    with pytest.raises(SystemExit) as info:
        main(["--version"])
    assert info.value.code == 0
    assert __version__ in capsys.readouterr().out
    for cmd in ("run", "check", "init"):
        with pytest.raises(SystemExit) as info:
            main([cmd, "--help"])
        assert info.value.code == 0
        assert "usage: tco " + cmd in capsys.readouterr().out


def test_python_dash_m(tmp_path):
    proc = subprocess.run([sys.executable, "-m", "tco", "--version"], capture_output=True,
                          text=True, cwd=tmp_path, env={"PYTHONPATH": str(demo_path().parents[1])})
    assert proc.returncode == 0 and proc.stdout.startswith("tco ")


def test_run_demo_json_only(capsys, tmp_path):
    code, out, err = run(capsys, "run", "--out", str(tmp_path), "--json-only", "--quiet")
    assert code == 0, err
    summary = json.loads((tmp_path / "demo" / "summary.json").read_text())
    assert summary["schema_version"] == "1.3"  # docs/summary-schema.md
    assert set(summary["trucks"]) == {"Diesel tractor", "Electric tractor"}
    assert summary["cashflow"]["comparisons"][0]["truck"] == "Electric tractor"
    assert not [p for p in tmp_path.rglob("*.part")]


def test_init_then_check(capsys, tmp_path):
    path = tmp_path / "mine.toml"
    assert run(capsys, "init", str(path))[0] == 0
    code, out, err = run(capsys, "check", str(path))
    assert code == 0, err
    assert "valid" in out
    code, out, err = run(capsys, "init", str(path))
    assert code == 2 and "already exists" in err


BAD = [
    ('curb_mass = "15.2 t"', 'curb_mass = -3', "trucks[0].body.curb_mass"),
    ('speed = "55 km/h"', 'speed = "55 kg"', "segments[2].speed"),
    ('grade = "5 %"', 'grade = "35 %"', "segments[2].grade"),
    ('engine_power = "330 kW"', 'engine_powr = "330 kW"', "trucks[0].diesel.engine_powr"),
    ('diesel = 1.48 ', 'diesel = -1.48 ', "prices.diesel"),
    ('currency = "EUR"', 'currency = "Euro"', "study.currency"),
]


@pytest.mark.parametrize("old, new, where", BAD)
def test_bad_input_is_one_line_exit_2_nothing_written(capsys, tmp_path, old, new, where):
    text = demo_path().read_text()
    assert old in text
    bad = tmp_path / "bad.toml"
    bad.write_text(text.replace(old, new, 1))
    out_dir = tmp_path / "out"
    code, out, err = run(capsys, "run", str(bad), "--out", str(out_dir), "--json-only")
    assert code == 2
    lines = err.strip().splitlines()
    assert len(lines) == 1, err
    assert str(bad) in lines[0] and where in lines[0]
    assert "Traceback" not in err
    assert not out_dir.exists() or not any(out_dir.rglob("*"))


def test_missing_files(capsys, tmp_path):
    code, _, err = run(capsys, "run", str(tmp_path / "nope.toml"))
    assert code == 2 and "file not found" in err
    text = demo_path().read_text().replace(
        '[[route.legs]]\nname = "loaded out"', '[[route.legs]]\nname = "loaded out"\nfile = "x.csv"', 1)
    (tmp_path / "s.toml").write_text(text)
    code, _, err = run(capsys, "check", str(tmp_path / "s.toml"))
    assert code == 2 and "route.legs[0]" in err


def test_bad_trace_rows_name_file_and_row(capsys, tmp_path):
    (tmp_path / "t.csv").write_text("time [s],speed [km/h],grade [%]\n0,0,0\n1,10,0\n0.5,12,0\n")
    text = demo_path().read_text().replace('slug = "demo"\n', "")
    start = text.index("[[route.legs]]")
    end = text.index("# ----", start)
    legs = '[[route.legs]]\npayload = 10\nfile = "t.csv"\n\n'
    (tmp_path / "s.toml").write_text(text[:start] + legs + text[end:])
    code, _, err = run(capsys, "check", str(tmp_path / "s.toml"))
    assert code == 2
    assert "t.csv" in err and "line 4" in err


def test_failed_run_keeps_previous_outputs(capsys, tmp_path):
    assert run(capsys, "run", "--out", str(tmp_path), "--json-only", "--quiet")[0] == 0
    summary = tmp_path / "demo" / "summary.json"
    before = summary.read_bytes()
    mine = tmp_path / "demo" / "my-notes.txt"
    mine.write_text("keep me")
    bad = tmp_path / "bad.toml"
    bad.write_text(demo_path().read_text().replace("diesel = 1.48 ", "diesel = -1 ", 1))
    assert run(capsys, "run", str(bad), "--out", str(tmp_path), "--json-only")[0] == 2
    assert summary.read_bytes() == before
    assert run(capsys, "run", "--out", str(tmp_path), "--json-only", "--quiet")[0] == 0
    assert mine.read_text() == "keep me"   # never deletes files it did not write


def test_unwritable_output_folder(capsys, tmp_path):
    blocker = tmp_path / "file"
    blocker.write_text("x")
    code, _, err = run(capsys, "run", "--out", str(blocker / "sub"), "--json-only")
    assert code == 2 and "--out" in err


def test_fleet_demo_json_only(capsys, tmp_path):
    code, out, err = run(capsys, "fleet", "--out", str(tmp_path), "--json-only", "--jobs", "1")
    assert code == 0, err
    data = json.loads((tmp_path / "demo-fleet" / "fleet.json").read_text())
    assert data["schema"] == "tco.fleet.summary/1.2"
    assert "routes feasible" in out and str(tmp_path / "demo-fleet" / "fleet.json") in out


def test_fleet_bad_row_is_one_line_exit_2_nothing_written(capsys, tmp_path):
    from tco.resources import inputs_dir

    src = inputs_dir() / "fleet"
    fleet = tmp_path / "fleet.csv"
    text = (src / "fleet.csv").read_text().replace("MF-102,", "MF-101,")
    fleet.write_text(text.replace("cycles/", str(src / "cycles") + "/"))
    code, out, err = run(capsys, "fleet", str(fleet), "--base", str(src / "base.toml"),
                         "--out", str(tmp_path / "out"))
    assert code == 2  # the cycles lie outside the fleet file's folder
    assert "outside the scenario's folder" in err and len(err.splitlines()) == 1
    code, out, err = run(capsys, "fleet", str(fleet), "--base", str(src / "base.toml"),
                         "--out", str(tmp_path / "out"), "--allow-folder", str(src))
    assert code == 2
    assert err.strip() == (f"tco: error: {fleet}: row 5: duplicate vehicle id 'MF-101' "
                           "(also on row 4)")
    assert not (tmp_path / "out").exists()
    code, out, err = run(capsys, "fleet", str(fleet), "--out", str(tmp_path / "out"))
    assert code == 2 and "--base" in err  # no base.toml beside this fleet file
    code, out, err = run(capsys, "fleet", str(tmp_path / "none.csv"))
    assert code == 2 and err.strip() == f"tco: error: {tmp_path / 'none.csv'}: file not found"


def test_batch_with_a_bad_client_finishes_the_rest_exit_2(capsys, tmp_path):
    folder = tmp_path / "clients"
    folder.mkdir()
    good = demo_path().read_text().replace("draws = 10000", "draws = 200")
    (folder / "a.toml").write_text(good.replace('slug = "demo"', 'slug = "a"'))
    (folder / "b.toml").write_text(good.replace('slug = "demo"', 'slug = "b"')
                                   .replace("days_per_year = 250", "days_per_year = 400"))
    code, out, err = run(capsys, "batch", str(folder), "--out", str(tmp_path / "out"),
                         "--json-only", "--jobs", "1")
    assert code == 2
    assert err.strip().splitlines() == [
        f"tco: error: {folder / 'b.toml'}: route.days_per_year: "
        "must be at most 366"]
    assert (tmp_path / "out" / "clients" / "a" / "summary.json").is_file()
    assert not (tmp_path / "out" / "clients" / "b").exists()
    assert (tmp_path / "out" / "clients" / "index.json").is_file()


def test_telematics_example_and_bad_scheduler(capsys, tmp_path):
    code, out, err = run(capsys, "telematics", "--out", str(tmp_path))
    assert code == 0, err
    folder = tmp_path / "telematics-example"
    assert "4 vehicles, 8 vehicle-days" in out
    for name in ("vehicle_days.csv", "vehicles.csv", "telematics.xlsx"):
        assert (folder / name).is_file()
    code, out, err = run(capsys, "telematics", str(folder / "data"), "--scheduler",
                         "tcp://127.0.0.1:1", "--out", str(tmp_path / "again"))
    assert code == 2
    assert err.startswith("tco: error: --scheduler: cannot connect") and err.count("\n") == 1
    assert not (tmp_path / "again").exists()
    code, out, err = run(capsys, "telematics", "--workers", "0", "--out", str(tmp_path))
    assert code == 2 and "--workers" in err
