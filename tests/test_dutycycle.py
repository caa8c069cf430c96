"""Tests for tco.dutycycle: building, reading, smoothing, resampling and joining traces.

Outside checks and their sources are named beside each check:
- constant-acceleration kinematics, v² = v₀² + 2aΔx (Halliday, Resnick & Walker,
  *Fundamentals of Physics*, ch. 2);
- unit conversions against a fresh ``pint.UnitRegistry`` (reference library);
- distances and durations of GPX tracks against gpxpy's own ``length_2d`` and
  ``get_duration`` (reference library), and against the WGS 84 equatorial radius
  a = 6 378 137 m (NIMA TR8350.2, Table 3.1);
- trapezoidal integration against ``scipy.integrate.cumulative_trapezoid``;
- the Gaussian's amplitude response exp(-(2πσ/λ)²/2), the Fourier transform of a
  Gaussian (Bracewell, *The Fourier Transform and Its Applications*, 3rd ed., ch. 2);
- grade = rise / run (definition; /work/shared/references.md "Grade").
"""
from __future__ import annotations

import datetime as dtm
import math
from pathlib import Path
from types import SimpleNamespace

import gpxpy
import gpxpy.gpx
import numpy as np
import pandas as pd
import pint
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st
from scipy.integrate import cumulative_trapezoid

from tco import dutycycle as dc
from tco.errors import InputError

DATA = Path(__file__).parent / "data"
ROOT = Path(__file__).resolve().parents[1]
UREG = pint.UnitRegistry()  # a fresh registry, independent of tco.units, as the reference
KMH = 1 / 3.6
WGS84_A = 6378137.0  # WGS 84 semi-major axis [m] (NIMA TR8350.2, Table 3.1)


# ------------------------------------------------------------------------- helpers
def assert_trace_contract(tr: pd.DataFrame, dt: float) -> None:
    """The output form other modules rely on (module docstring of tco.dutycycle)."""
    assert list(tr.columns) == list(dc.COLUMNS)
    assert isinstance(tr.index, pd.RangeIndex) and tr.index[0] == 0
    np.testing.assert_allclose(tr["time"], np.arange(len(tr)) * dt, rtol=0, atol=1e-9)
    v = tr["speed"].to_numpy()
    d = tr["distance"].to_numpy()
    assert np.all(v >= 0)
    assert d[0] == 0.0
    # interval rule: Δd = (v_i + v_{i+1}) / 2 · dt
    np.testing.assert_allclose(np.diff(d), 0.5 * (v[1:] + v[:-1]) * dt, rtol=1e-12, atol=1e-9)
    # elevation consistent with grade × horizontal distance (grade = rise / run)
    np.testing.assert_allclose(
        np.diff(tr["elevation"]), tr["grade"].to_numpy()[:-1] * np.diff(d), rtol=1e-9, atol=1e-9
    )
    assert tr["leg"].dtype == np.int64
    assert tr.attrs["dt"] == dt
    assert np.all(np.abs(tr["grade"]) <= dc.MAX_GRADE + 1e-9)


def write(tmp_path: Path, text: str, name: str = "trace.csv") -> Path:
    path = tmp_path / name
    path.write_text(text, encoding="utf-8")
    return path


def climb(z) -> float:
    dz = np.diff(np.asarray(z, dtype=float))
    return float(dz[dz > 0].sum())


def distance_tolerance(events: int, a: float, b: float, dt: float) -> float:
    """Bound on the resampled distance error: each start, stop or change of cruise speed
    switches the acceleration on and off once (|Δa| ≤ 2·max(a, b) in all), and each switch
    inside a step moves the trapezoid-rule distance by at most |Δa|·dt²/8."""
    return events * 2 * max(a, b) * dt**2 / 8 + 1e-6


def gpx_track(points, name="Test fixture track") -> gpxpy.gpx.GPX:
    gpx = gpxpy.gpx.GPX()
    track = gpxpy.gpx.GPXTrack(name=name)
    gpx.tracks.append(track)
    seg = gpxpy.gpx.GPXTrackSegment()
    track.segments.append(seg)
    for lat, lon, ele, time in points:
        seg.points.append(gpxpy.gpx.GPXTrackPoint(lat, lon, elevation=ele, time=time))
    return gpx


T0 = dtm.datetime(2024, 3, 4, 8, 0, 0, tzinfo=dtm.timezone.utc)


# ------------------------------------------------------------------------- segments
@pytest.mark.parametrize("dt", [0.5, 1.0, 2.0])
def test_single_segment_time_follows_constant_acceleration_kinematics(dt):
    """Rest-to-rest over L at cruise V: t = L/V + V/(2a) + V/(2b) (Halliday, ch. 2)."""
    length, speed, a, b = 3000.0, 20.0, 0.5, 1.0
    tr = dc.from_segments([{"length": length, "speed": speed}], dt=dt, max_accel=a, max_decel=b)
    assert_trace_contract(tr, dt)
    expected = length / speed + speed / (2 * a) + speed / (2 * b)  # 180 s
    assert abs(tr["time"].iloc[-1] - expected) <= dt  # the last step is rounded up
    assert tr["speed"].iloc[0] == 0 and tr["speed"].iloc[-1] == 0
    assert tr["speed"].max() == pytest.approx(speed, rel=dt / expected)
    assert abs(tr["distance"].iloc[-1] - length) <= distance_tolerance(2, a, b, dt)


@pytest.mark.parametrize("dt", [1.0, 2.0])
def test_built_distance_equals_sum_of_lengths(dt):
    segs = [
        {"length": 4000.0, "speed": 80 * KMH, "grade": 0.02, "stops": 2, "dwell": 30.0},
        {"length": 2500.0, "speed": 50 * KMH},
        {"length": 6000.0, "speed": 85 * KMH, "stops": 1, "dwell": 45.0},
    ]
    a, b = dc.DEFAULT_MAX_ACCEL, dc.DEFAULT_MAX_DECEL
    tr = dc.from_segments(segs, dt=dt)
    assert_trace_contract(tr, dt)
    events = 1 + 2 * 3 + 2 + 1  # start, 3 stops (arrive and leave), 2 speed changes, end
    assert abs(tr["distance"].iloc[-1] - 12500.0) <= distance_tolerance(events, a, b, dt)


@pytest.mark.parametrize("dt", [0.5, 1.0, 2.0])
def test_acceleration_limits_never_exceeded(dt):
    segs = [
        {"length": 1500.0, "speed": 60 * KMH, "stops": 1, "dwell": 20.0},
        {"length": 800.0, "speed": 30 * KMH},
        {"length": 3000.0, "speed": 88 * KMH, "grade": -0.03},
    ]
    a, b = 0.35, 0.8
    tr = dc.from_segments(segs, dt=dt, max_accel=a, max_decel=b)
    acc = np.diff(tr["speed"]) / dt
    assert acc.max() <= a * (1 + 1e-9)
    assert acc.min() >= -b * (1 + 1e-9)
    # and the limits are actually used (a test that could not fail would be a defect)
    assert acc.max() > 0.9 * a and acc.min() < -0.9 * b


def test_stops_reach_zero_speed_and_dwell():
    dwell, dt, length, n = 40.0, 1.0, 4000.0, 3
    tr = dc.from_segments([{"length": length, "speed": 70 * KMH, "stops": n, "dwell": dwell}],
                          dt=dt)
    v = tr["speed"].to_numpy()
    inner = v[1:-1] == 0
    # runs of zero speed strictly inside the trip
    edges = np.diff(np.concatenate(([0], inner.astype(int), [0])))
    starts, ends = np.flatnonzero(edges == 1), np.flatnonzero(edges == -1)
    assert len(starts) == n
    for s0, s1 in zip(starts, ends):
        assert (s1 - s0 - 1) * dt >= dwell - 2 * dt  # the dwell spans the run of zeros
        stop_at = tr["distance"].iloc[s0 + 1]
        k = round(stop_at / (length / (n + 1)))
        assert 1 <= k <= n
        assert abs(stop_at - k * length / (n + 1)) < 1.0  # evenly spaced at L·k/(n+1)
    assert dc.trace_summary(tr)["stops"] == n


def test_braking_anticipated_for_slower_segment():
    fast, slow = 85 * KMH, 40 * KMH
    tr = dc.from_segments([{"length": 3000.0, "speed": fast}, {"length": 1000.0, "speed": slow}])
    d, v = tr["distance"].to_numpy(), tr["speed"].to_numpy()
    assert v[d < 2000].max() == pytest.approx(fast, rel=1e-3)  # reaches cruise first
    assert np.all(v[d >= 3000.0] <= slow + 1e-9)  # already slow on entering
    # braking distance from v² = v₀² + 2aΔx (Halliday, ch. 2) ends at the boundary
    brake_start = 3000.0 - (fast**2 - slow**2) / (2 * dc.DEFAULT_MAX_DECEL)
    assert v[(d > 1000) & (d < brake_start - 30)].min() == pytest.approx(fast, rel=1e-3)


def test_start_and_end_at_cruise_speed():
    speed = 60 * KMH
    tr = dc.from_segments([{"length": 2000.0, "speed": speed}], start_at_rest=False,
                          end_at_rest=False)
    # speeds are divided by the time-scale factor (≥ 1, see resample Notes)
    np.testing.assert_allclose(tr["speed"], speed / tr.attrs["time_scale"], rtol=1e-12)
    assert tr["time"].iloc[-1] == pytest.approx(2000.0 / speed, abs=1.0)


def test_elevation_gain_is_sum_of_length_times_grade():
    """Rise of a segment of horizontal length L at grade s is L·s (grade = rise/run)."""
    segs = [
        {"length": 2000.0, "speed": 70 * KMH, "grade": 0.04},
        {"length": 1000.0, "speed": 70 * KMH, "grade": 0.0},
        {"length": 1500.0, "speed": 70 * KMH, "grade": -0.03},
        {"length": 1000.0, "speed": 70 * KMH, "grade": 0.02},
    ]
    tr = dc.from_segments(segs, start_elevation=150.0)
    rise = sum(s["length"] * s["grade"] for s in segs if s["grade"] > 0)  # 100 m
    fall = -sum(s["length"] * s["grade"] for s in segs if s["grade"] < 0)  # 45 m
    summary = dc.trace_summary(tr)
    # the sag between -3 % and +2 % may fall inside one step: at most |Δgrade|·v·dt
    sag = 0.05 * 70 * KMH * 1.0
    assert summary["climb"] == pytest.approx(rise, abs=sag)
    assert summary["descent"] == pytest.approx(fall, abs=sag)
    assert tr["elevation"].iloc[0] == 150.0
    assert tr["elevation"].iloc[-1] == pytest.approx(150.0 + rise - fall, abs=0.02 * 1.0)
    assert summary["max_grade"] == pytest.approx(0.04)
    assert summary["min_grade"] == pytest.approx(-0.03)
    assert tr.attrs["climb_before_smoothing"] == pytest.approx(rise)


def test_segments_accept_quantity_strings_and_objects():
    """Strings with units give the same cycle as SI numbers converted with pint."""
    as_text = [{"length": "2 km", "speed": "50 mph", "grade": "3 %", "stops": 1,
                "dwell": "1 min", "name": "climb"}]
    as_si = [SimpleNamespace(
        length=UREG.Quantity(2, "km").to("m").magnitude,
        speed=UREG.Quantity(50, "mph").to("m/s").magnitude,
        grade=UREG.Quantity(3, "percent").to("").magnitude,
        stops=1,
        dwell=UREG.Quantity(1, "min").to("s").magnitude,
    )]
    pd.testing.assert_frame_equal(dc.from_segments(as_text), dc.from_segments(as_si),
                                  rtol=1e-12)


@pytest.mark.parametrize(
    "segments, kwargs, where",
    [
        ([], {}, "segments"),
        ({"length": 1.0, "speed": 1.0}, {}, "segments"),
        ([{"speed": 10.0}], {}, "segments[0].length"),
        ([{"length": 100.0}], {}, "segments[0].speed"),
        ([{"length": -5.0, "speed": 10.0}], {}, "segments[0].length"),
        ([{"length": 100.0, "speed": 0.0}], {}, "segments[0].speed"),
        ([{"length": 100.0, "speed": 10.0, "grade": 0.31}], {}, "segments[0].grade"),
        ([{"length": 100.0, "speed": 10.0, "grade": "-35 %"}], {}, "segments[0].grade"),
        ([{"length": 100.0, "speed": 10.0, "stops": 1.5}], {}, "segments[0].stops"),
        ([{"length": 100.0, "speed": 10.0, "stops": -1}], {}, "segments[0].stops"),
        ([{"length": 100.0, "speed": 10.0, "dwell": -3}], {}, "segments[0].dwell"),
        ([{"length": 100.0, "speed": 10.0, "lenght": 3}], {}, "segments[0]"),
        ([{"length": "ten metres", "speed": 10.0}], {}, "segments[0].length"),
        ([{"length": "10 kg", "speed": 10.0}], {}, "segments[0].length"),
        ([{"length": 100.0, "speed": 10.0}], {"dt": 0}, "dt"),
        ([{"length": 100.0, "speed": 10.0}], {"max_accel": 0}, "max_accel"),
        ([{"length": 100.0, "speed": 10.0}], {"max_decel": -1}, "max_decel"),
    ],
)
def test_segment_errors(segments, kwargs, where):
    with pytest.raises(InputError) as err:
        dc.from_segments(segments, **kwargs)
    assert err.value.where == where


# ------------------------------------------------------------------------- CSV
def test_csv_units_in_headers_convert_like_pint():
    tr = dc.read_csv_trace(DATA / "dutycycle_units.csv", dt=1.0)
    assert_trace_contract(tr, 1.0)
    speed = UREG.Quantity(30, "mph").to("m/s").magnitude
    np.testing.assert_allclose(tr["speed"], speed, rtol=1e-12)
    assert tr["time"].iloc[-1] == UREG.Quantity(10, "min").to("s").magnitude
    length = UREG.Quantity(30 * 10 / 60, "mi").to("m").magnitude  # 5 miles
    assert tr["distance"].iloc[-1] == pytest.approx(length, rel=1e-12)
    rise = UREG.Quantity(100, "ft").to("m").magnitude
    # a straight grade survives smoothing exactly (symmetric kernel, line-extended ends)
    assert tr["elevation"].iloc[-1] - tr["elevation"].iloc[0] == pytest.approx(rise, rel=1e-9)
    assert tr["elevation"].iloc[0] == pytest.approx(UREG.Quantity(1000, "ft").to("m").magnitude)
    np.testing.assert_allclose(tr["grade"], rise / length, rtol=1e-9)
    assert tr.attrs["source"].endswith("dutycycle_units.csv")


def test_csv_default_units_without_brackets(tmp_path):
    """No bracket: time s, speed km/h, grade %, elevation m, distance km (documented)."""
    path = write(tmp_path, "time,speed,grade\n0,36,2\n10,36,2\n20,36,2\n")
    tr = dc.read_csv_trace(path, dt=1.0)
    np.testing.assert_allclose(tr["speed"], UREG.Quantity(36, "km/h").to("m/s").magnitude)
    np.testing.assert_allclose(tr["grade"], 0.02)
    assert tr["distance"].iloc[-1] == pytest.approx(200.0)
    assert tr["elevation"].iloc[-1] == pytest.approx(4.0)  # rise = run × grade
    path = write(tmp_path, "distance,elevation\n0,0\n1,5\n2,10\n", "route.csv")
    tr = dc.read_csv_trace(path, cruise_speed="36 km/h")
    assert tr["distance"].iloc[-1] == pytest.approx(2000.0, abs=0.5)


@pytest.mark.parametrize("unit, values", [("%", [3, 3, 3]), ("-", [0.03, 0.03, 0.03]),
                                          ("percent", [3, 3, 3]), ("", [0.03, 0.03, 0.03])])
def test_csv_grade_units(tmp_path, unit, values):
    rows = "".join(f"{t},54,{g}\n" for t, g in zip((0, 30, 60), values))
    tr = dc.read_csv_trace(write(tmp_path, f"time [s],speed [km/h],grade [{unit}]\n" + rows))
    np.testing.assert_allclose(tr["grade"], 0.03, rtol=1e-12)


def test_csv_at_native_step_returns_the_speeds_given(tmp_path):
    """Resampling at the file's own step changes nothing; distance is the trapezoid rule
    (checked against scipy.integrate.cumulative_trapezoid)."""
    rng = np.random.default_rng(5)
    v_kmh = np.round(np.clip(np.cumsum(rng.normal(0, 2, 120)) + 40, 0, None), 1)
    v_kmh[0] = 0.0
    rows = "".join(f"{t},{v},1.5\n" for t, v in enumerate(v_kmh))
    tr = dc.read_csv_trace(write(tmp_path, "time [s],speed [km/h],grade [%]\n" + rows), dt=1.0)
    v = v_kmh / 3.6
    np.testing.assert_allclose(tr["speed"], v, rtol=1e-12)
    np.testing.assert_allclose(tr["distance"], cumulative_trapezoid(v, dx=1.0, initial=0),
                               rtol=1e-12, atol=1e-9)


def test_csv_route_with_cruise_speed_builds_time(tmp_path):
    rows = "".join(f"{x / 10},{100 + 2 * x}\n" for x in range(0, 51))  # 5 km at 2 %/100 m
    path = write(tmp_path, "# a route without times\ndistance [km],elevation [m]\n" + rows)
    a, b, speed = 0.4, 0.9, 20.0
    tr = dc.read_csv_trace(path, cruise_speed=speed, max_accel=a, max_decel=b)
    assert_trace_contract(tr, 1.0)
    # rest to rest: t = L/V + V/(2a) + V/(2b) (Halliday, ch. 2)
    expected = 5000 / speed + speed / (2 * a) + speed / (2 * b)
    assert abs(tr["time"].iloc[-1] - expected) <= 1.0
    assert tr["distance"].iloc[-1] == pytest.approx(5000.0, abs=distance_tolerance(2, a, b, 1))
    assert tr["elevation"].iloc[-1] - tr["elevation"].iloc[0] == pytest.approx(100.0, abs=0.1)


def test_csv_route_with_speed_column_and_a_stop(tmp_path):
    speeds = [50, 50, 50, 0, 70, 70, 70, 30]
    rows = "".join(f"{500 * i},{10 * i},{v}\n" for i, v in enumerate(speeds))
    path = write(tmp_path, "distance [m],elevation [m],speed [km/h]\n" + rows)
    tr = dc.read_csv_trace(path, cruise_speed=10.0)
    assert "cruise_speed ignored" in " ".join(tr.attrs["notes"])
    s = dc.trace_summary(tr)
    assert s["stops"] == 1
    assert tr["speed"].max() <= 70 * KMH + 1e-9
    assert s["distance"] == pytest.approx(3500.0, abs=2.0)


def test_csv_time_may_start_anywhere(tmp_path):
    path = write(tmp_path, "time [h],speed [km/h],grade [%]\n8,0,0\n8.01,36,0\n8.02,36,0\n")
    tr = dc.read_csv_trace(path)
    assert tr["time"].iloc[-1] == pytest.approx(72.0)
    assert any("shifted" in n for n in tr.attrs["notes"])


def test_csv_line_numbers_count_comment_lines():
    with pytest.raises(InputError) as err:
        dc.read_csv_trace(DATA / "dutycycle_time_backwards.csv")
    assert err.value.where == "line 6, column 'time'"
    assert "backwards" in err.value.message
    assert err.value.file.endswith("dutycycle_time_backwards.csv")


HEADER = "time [s],speed [km/h],grade [%]\n"


@pytest.mark.parametrize(
    "text, where, message",
    [
        ("", None, "empty trace"),
        ("# only a comment\n\n", None, "empty trace"),
        (HEADER, "line 1", "no data rows"),
        (HEADER + "0,0,0\n", "line 2", "at least two"),
        (HEADER + "0,0,0\n1,,0\n", "line 3, column 'speed'", "blank"),
        (HEADER + "0,0,0\n1,5\n", "line 3, column 'grade'", "blank"),
        (HEADER + "0,0,0\n1,5,abc\n", "line 3, column 'grade'", "not a number"),
        (HEADER + "0,0,0\n1,5,nan\n", "line 3, column 'grade'", "finite"),
        (HEADER + "0,0,0\n1,5,0,7\n", "line 3", "cells"),
        (HEADER + "0,0,0\n1,5,0\n1,5,0\n", "line 4, column 'time'", "repeats"),
        (HEADER + "0,0,0\n1,-5,0\n", "line 3, column 'speed'", "negative speed"),
        (HEADER + "0,0,0\n1,5,31\n", "line 3, column 'grade'", "beyond"),
        ("time,speed,temperature\n0,0,0\n1,1,1\n", "line 1, column 3", "unknown column"),
        ("time,speed\n0,0\n1,1\n", "line 1", "'grade' or 'elevation'"),
        ("time,grade\n0,0\n1,1\n", "line 1", "missing column 'speed'"),
        ("speed,grade\n0,0\n1,1\n", "line 1", "missing column 'time' or 'distance'"),
        ("distance,speed\n0,0\n1,1\n", "line 1", "missing column 'elevation'"),
        ("time,speed,grade,elevation\n0,0,0,0\n1,1,1,1\n", "line 1", "not both"),
        ("time,speed,grade,grade\n0,0,0,0\n1,1,1,1\n", "line 1, column 4", "twice"),
        ("time [s],speed [kg],grade\n0,0,0\n1,1,1\n", "line 1, column 'speed'",
         "not a speed unit"),
        ("time [s],speed [km/h],elevation [s]\n0,0,0\n1,1,1\n",
         "line 1, column 'elevation'", "not a length unit"),
        ("time [s],speed [zorks],grade\n0,0,0\n1,1,1\n", "line 1, column 'speed'",
         "unknown unit"),
        ("distance,elevation\n0,0\n1,1\n", "cruise_speed", "no speed column"),
        ("distance,elevation\n0,0\n1,1\n1,2\n", "line 4, column 'distance'", "repeats"),
        ("distance,elevation,speed\n0,0,50\n1,1,0\n2,1,0\n", "line 4, column 'speed'",
         "speed is 0"),
        (HEADER + "0,0,0\n0.5,1,0\n", "dt", "less than one time step"),
    ],
)
def test_csv_errors(tmp_path, text, where, message):
    path = write(tmp_path, text)
    with pytest.raises(InputError) as err:
        dc.read_csv_trace(path, dt=1.0)
    assert err.value.file == str(path)
    assert err.value.where == where
    assert message in err.value.message


def test_reader_parameter_errors(tmp_path):
    path = write(tmp_path, HEADER + "0,0,0\n10,36,0\n")
    for kwargs, where in [({"dt": -1}, "dt"), ({"dt": "fast"}, "dt"),
                          ({"smoothing_window": -5}, "smoothing_window"),
                          ({"smoothing_window": "200 s"}, "smoothing_window")]:
        with pytest.raises(InputError) as err:
            dc.read_csv_trace(path, **kwargs)
        assert err.value.where == where
    # a window written with units is read with pint
    tr = dc.read_csv_trace(path, smoothing_window="0.2 km")
    assert tr.attrs["smoothing"] is None  # a grade column is never smoothed
    route = write(tmp_path, "distance,elevation\n0,0\n1,5\n", "route.csv")
    assert dc.read_csv_trace(route, cruise_speed=10, smoothing_window="0.2 km").attrs[
        "smoothing"]["window_m"] == pytest.approx(200.0)
    with pytest.raises(InputError) as err:
        dc.read_csv_trace(route, cruise_speed="-3 km/h")
    assert err.value.where == "cruise_speed"


def test_segments_as_dataframe_rows():
    rows = pd.DataFrame({"length": [1000.0, 500.0], "speed": [20.0, 10.0],
                         "grade": [0.01, 0.0], "stops": [0, 1], "dwell": [0.0, 30.0]})
    pd.testing.assert_frame_equal(dc.from_segments(rows),
                                  dc.from_segments(rows.to_dict("records")))


def test_csv_missing_file(tmp_path):
    with pytest.raises(InputError, match="file not found") as err:
        dc.read_csv_trace(tmp_path / "nowhere.csv")
    assert err.value.file.endswith("nowhere.csv")


def test_csv_grade_beyond_limit_after_smoothing_names_the_line(tmp_path):
    # a 500 m stretch rising 250 m (50 %): still far beyond 30 % after smoothing
    rows = "".join(f"{50 * i},{min(max(0, 25 * (i - 10)), 250)}\n" for i in range(41))
    path = write(tmp_path, "distance [m],elevation [m]\n" + rows)
    with pytest.raises(InputError, match="after smoothing") as err:
        dc.read_csv_trace(path, cruise_speed=15.0)
    assert err.value.where.startswith("line ")
    assert err.value.file == str(path)


# ------------------------------------------------------------------------- smoothing
def _noisy_flat_csv(tmp_path, noise_m=3.0, hill=None):
    """A 10 km route logged every second at 36 km/h (10 m spacing), elevation with
    uniform ±noise_m noise."""
    rng = np.random.default_rng(42)
    t = np.arange(0, 1001)
    x = 10.0 * t
    z = np.round(200 + rng.uniform(-noise_m, noise_m, t.size) + (hill(x) if hill else 0), 3)
    rows = "".join(f"{ti},36,{zi:.3f}\n" for ti, zi in zip(t, z))
    return write(tmp_path, "time [s],speed [km/h],elevation [m]\n" + rows), x, z


def test_flat_route_noise_does_not_invent_climbing(tmp_path):
    path, _, z = _noisy_flat_csv(tmp_path)
    tr = dc.read_csv_trace(path)
    raw, smooth = tr.attrs["climb_before_smoothing"], tr.attrs["climb_after_smoothing"]
    assert raw == pytest.approx(climb(z))
    assert raw > 500  # ±3 m noise every 10 m: about 1 m of false climb per sample
    assert smooth < 0.05 * raw  # measured here: about 2 % of the raw figure
    assert smooth == pytest.approx(dc.trace_summary(tr)["climb"])
    assert tr.attrs["smoothing"]["window_m"] == dc.DEFAULT_SMOOTHING_WINDOW
    # without smoothing the noise stays, and shows as impossible grades (±6 m over 10 m)
    with pytest.raises(InputError, match="grade of .* is beyond") as err:
        dc.read_csv_trace(path, smoothing_window=None)
    assert "after smoothing" not in err.value.message


def test_smooth_hill_keeps_its_climb(tmp_path):
    """Three hills of 60 m over 3 km each: 180 m of climb (analytic), kept within 3 %."""
    def hill(x):
        return 30 * (1 - np.cos(2 * np.pi * x / 3000))

    x = np.arange(0, 9001, 10.0)
    exact = 2 * 30 * 3
    assert climb(dc.smooth_elevation(x, hill(x))) == pytest.approx(exact, rel=0.03)
    path, _, _ = _noisy_flat_csv(tmp_path, noise_m=0.0, hill=hill)
    assert dc.read_csv_trace(path).attrs["climb_after_smoothing"] == pytest.approx(
        climb(hill(np.arange(0, 10001, 10.0))), rel=0.03)


@pytest.mark.parametrize("wavelength", [1000.0, 2000.0, 4000.0])
def test_smoothing_amplitude_response_is_gaussian(wavelength):
    """Amplitude kept = exp(-(2πσ/λ)²/2), σ = window/4 (Fourier transform of a Gaussian,
    Bracewell ch. 2); checked away from the ends, to 1 % of the amplitude."""
    x = np.arange(0, 20001, 5.0)
    z = 10 * np.sin(2 * np.pi * x / wavelength)
    zs = dc.smooth_elevation(x, z, window=250.0)
    middle = (x > 3000) & (x < 17000)
    kept = np.exp(-0.5 * (2 * np.pi * 62.5 / wavelength) ** 2)
    np.testing.assert_allclose(zs[middle], kept * z[middle], atol=0.01 * 10)


def test_smooth_elevation_keeps_straight_grade_and_series_type():
    x = pd.Series(np.arange(0, 3001, 7.0), index=np.arange(1000, 1429))
    z = pd.Series(55 - 0.05 * x.to_numpy(), index=x.index, name="elevation")
    out = dc.smooth_elevation(x, z)
    assert isinstance(out, pd.Series) and out.index.equals(z.index) and out.name == "elevation"
    np.testing.assert_allclose(out, z, atol=1e-9)
    assert isinstance(dc.smooth_elevation(x.to_numpy(), z.to_numpy()), np.ndarray)
    np.testing.assert_array_equal(dc.smooth_elevation(x, z, window=None), z)


# ------------------------------------------------------------------------- GPX
def test_gpx_round_trip_via_gpxpy(tmp_path):
    """A track written with gpxpy along the equator, one fix every 2 s at 15 m/s."""
    one_degree = WGS84_A * math.pi / 180  # metres per degree of longitude on the equator
    n, step_t, speed = 301, 2.0, 15.0
    x = np.arange(n) * speed * step_t
    z = 50 + 20 * (1 - np.cos(2 * np.pi * x / 3000))  # 3 hills of 40 m: 120 m climb
    points = [(0.0, xi / one_degree, zi, T0 + dtm.timedelta(seconds=i * step_t))
              for i, (xi, zi) in enumerate(zip(x, z))]
    gpx = gpx_track(points)
    path = write(tmp_path, gpx.to_xml(), "track.gpx")
    for dt in (1.0, 2.0):
        tr = dc.read_gpx_trace(path, dt=dt)
        assert_trace_contract(tr, dt)
        reread = gpxpy.parse(path.read_text())
        # gpxpy (reference library) and the WGS 84 equatorial arc a·Δλ
        assert tr["distance"].iloc[-1] == pytest.approx(reread.length_2d(), rel=1e-9)
        assert tr["distance"].iloc[-1] == pytest.approx(x[-1], rel=1e-6)
        assert tr["time"].iloc[-1] == pytest.approx(reread.get_duration())
        np.testing.assert_allclose(tr["speed"], speed, rtol=1e-6)
        assert tr.attrs["climb_after_smoothing"] == pytest.approx(120.0, rel=0.03)
        assert tr.attrs["climb_before_smoothing"] == pytest.approx(climb(z))


def test_gpx_multiple_segments_are_joined(tmp_path):
    gpx = gpx_track([(0.0, i * 1e-4, 10.0, T0 + dtm.timedelta(seconds=i)) for i in range(5)])
    seg = gpxpy.gpx.GPXTrackSegment()
    for i in range(5, 10):
        seg.points.append(gpxpy.gpx.GPXTrackPoint(0.0, i * 1e-4, elevation=10.0,
                                                  time=T0 + dtm.timedelta(seconds=i)))
    gpx.tracks[0].segments.append(seg)
    tr = dc.read_gpx_trace(write(tmp_path, gpx.to_xml(), "two.gpx"))
    assert tr["time"].iloc[-1] == 9.0
    assert tr["distance"].iloc[-1] == pytest.approx(gpx.length_2d() + 1e-4 * 111319.49, rel=1e-6)
    assert "2 track segments" in tr.attrs["notes"][0]


@pytest.mark.parametrize(
    "name, where, message",
    [
        ("dutycycle_no_elevation.gpx", "track 1, segment 1, point 3", "no elevation"),
        ("dutycycle_no_time.gpx", "track 1, segment 1, point 2", "no timestamp"),
    ],
)
def test_gpx_fixture_errors(name, where, message):
    with pytest.raises(InputError) as err:
        dc.read_gpx_trace(DATA / name)
    assert err.value.where == where and message in err.value.message
    assert err.value.file.endswith(name)


def test_gpx_other_errors(tmp_path):
    with pytest.raises(InputError, match="file not found"):
        dc.read_gpx_trace(tmp_path / "missing.gpx")
    with pytest.raises(InputError, match="not a readable GPX"):
        dc.read_gpx_trace(write(tmp_path, "this is not xml <", "bad.gpx"))
    with pytest.raises(InputError, match="no track points"):
        dc.read_gpx_trace(write(tmp_path, gpxpy.gpx.GPX().to_xml(), "empty.gpx"))
    back = [(0.0, 0.0, 1.0, T0), (0.0, 1e-4, 1.0, T0 + dtm.timedelta(seconds=5)),
            (0.0, 2e-4, 1.0, T0 + dtm.timedelta(seconds=3))]
    with pytest.raises(InputError, match="backwards") as err:
        dc.read_gpx_trace(write(tmp_path, gpx_track(back).to_xml(), "back.gpx"))
    assert err.value.where == "track 1, segment 1, point 3"
    same = [(0.0, 0.0, 1.0, T0), (0.0, 1e-4, 1.0, T0)]
    with pytest.raises(InputError, match="repeats"):
        dc.read_gpx_trace(write(tmp_path, gpx_track(same).to_xml(), "same.gpx"))
    steep = [(0.0, i * 1e-4, 100.0 * i, T0 + dtm.timedelta(seconds=i)) for i in range(40)]
    with pytest.raises(InputError, match="beyond") as err:
        dc.read_gpx_trace(write(tmp_path, gpx_track(steep).to_xml(), "steep.gpx"))
    assert err.value.where.startswith("track 1, segment 1, point ")


# ------------------------------------------------------------------------- resample
@pytest.mark.parametrize("dt", [0.5, 1.0, 3.0])
def test_resample_preserves_total_distance_and_time(dt):
    rng = np.random.default_rng(11)
    t = np.concatenate(([0.0], np.cumsum(rng.uniform(0.3, 4.0, 300)))) + 17.0
    s = np.concatenate(([0.0], np.cumsum(rng.uniform(0, 30, 300))))
    z = 10 + 0.01 * s
    tr = dc.resample(t, s, z, dt=dt)
    assert_trace_contract(tr, dt)
    span = t[-1] - t[0]
    assert span <= tr["time"].iloc[-1] < span + dt
    assert tr["distance"].iloc[-1] == pytest.approx(s[-1], rel=1e-12)
    np.testing.assert_allclose(tr["grade"], 0.01, rtol=1e-9)


def test_resample_with_speeds_keeps_distance_within_bound():
    t = np.array([0.0, 7.0, 19.0, 40.0, 53.0, 60.5])
    v = np.array([0.0, 7.0, 13.0, 13.0, 4.0, 0.0])
    s = cumulative_trapezoid(v, t, initial=0)  # scipy reference for the interval rule
    tr = dc.resample(t, s, np.zeros_like(t), dt=2.0, speed=v)
    assert_trace_contract(tr, 2.0)
    assert tr["speed"].iloc[0] == 0 and tr["speed"].iloc[-1] == 0
    accel_changes = np.abs(np.diff(np.diff(v) / np.diff(t))).sum() + 1.0 + 0.5
    assert tr["distance"].iloc[-1] == pytest.approx(s[-1], abs=accel_changes * 2.0**2 / 8)


@pytest.mark.parametrize(
    "args, where",
    [
        (([0, 1, 1], [0, 1, 2], [0, 0, 0]), "time[2]"),
        (([0, 2, 1], [0, 1, 2], [0, 0, 0]), "time[2]"),
        (([0, 1, 2], [0, 2, 1], [0, 0, 0]), "distance[2]"),
        (([0, 1, 2], [0, 1, 2], [0, 0, 0], 1.0, [0, -1, 1]), "speed[1]"),
        (([0, 1, 2], [0, 1], [0, 0, 0]), "distance"),
        (([0], [0], [0]), "time"),
        (([0, 1, 2], [0, 1, np.nan], [0, 0, 0]), "distance"),
        (([0, 0.5], [0, 1], [0, 0]), "dt"),
        (([0, 1, 2], [0, 10, 20], [0, 0, 5]), "distance 10 m"),
    ],
)
def test_resample_errors(args, where):
    with pytest.raises(InputError) as err:
        dc.resample(*args)
    assert err.value.where == where


increments = st.lists(st.tuples(st.floats(0.05, 20.0), st.floats(0.0, 40.0)),
                      min_size=2, max_size=60)


@settings(max_examples=60, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(increments, st.sampled_from([0.5, 1.0, 2.0]), st.booleans())
def test_resampled_distance_monotone_and_speed_non_negative(steps, dt, with_speed):
    dts = np.array([a for a, _ in steps])
    t = np.concatenate(([0.0], np.cumsum(dts)))
    if t[-1] < dt:
        return
    if with_speed:
        v = np.array([0.0] + [b for _, b in steps])
        s = cumulative_trapezoid(v, t, initial=0)
    else:
        v = None
        s = np.concatenate(([0.0], np.cumsum([b * a for a, b in steps])))
    tr = dc.resample(t, s, 0.02 * s, dt=dt, speed=v)
    assert np.all(np.diff(tr["distance"]) >= 0)
    assert np.all(tr["speed"] >= 0)
    assert_trace_contract(tr, dt)


segment = st.fixed_dictionaries({
    "length": st.floats(50.0, 3000.0),
    "speed": st.floats(2.0, 30.0),
    "grade": st.floats(-0.08, 0.08),
    "stops": st.integers(0, 2),
    "dwell": st.floats(0.0, 60.0),
})


@settings(max_examples=40, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(st.lists(segment, min_size=1, max_size=4), st.sampled_from([0.5, 1.0, 2.0]))
def test_synthetic_cycle_properties(segs, dt):
    a, b = 0.45, 0.95
    tr = dc.from_segments(segs, dt=dt, max_accel=a, max_decel=b)
    assert_trace_contract(tr, dt)
    acc = np.diff(tr["speed"]) / dt
    assert acc.max() <= a * (1 + 1e-9) and acc.min() >= -b * (1 + 1e-9)
    events = 2 + len(segs) + 2 * sum(s["stops"] for s in segs)
    total = sum(s["length"] for s in segs)
    assert abs(tr["distance"].iloc[-1] - total) <= distance_tolerance(events, a, b, dt)


# ------------------------------------------------------------------------- legs
def test_concatenate_out_and_back():
    out = dc.from_segments([{"length": 3000.0, "speed": 70 * KMH, "grade": 0.03, "stops": 1,
                             "dwell": 20.0}], start_elevation=100.0)
    back = dc.from_segments([{"length": 3000.0, "speed": 80 * KMH, "grade": -0.03}],
                            start_elevation=555.0)  # its own datum: shifted on joining
    both = dc.concatenate_legs([out, back])
    assert_trace_contract(both, 1.0)
    assert both.attrs["leg_starts"] == [0, len(out)] == dc.leg_starts(both).tolist()
    assert both["leg"].tolist() == [0] * len(out) + [1] * len(back)
    assert both["elevation"].iloc[0] == 100.0
    assert both["elevation"].iloc[-1] == pytest.approx(100.0, abs=0.01)
    assert both["elevation"].iloc[len(out)] == pytest.approx(out["elevation"].iloc[-1])
    assert both.attrs["elevation_shift"][1] == pytest.approx(out["elevation"].iloc[-1] - 555.0)
    s_out, s_back, s = (dc.trace_summary(x) for x in (out, back, both))
    assert s["distance"] == pytest.approx(s_out["distance"] + s_back["distance"])
    assert s["duration"] == s_out["duration"] + s_back["duration"] + 1.0
    assert s["stops"] == 2  # the stop on the way out and the turn-round
    assert s["legs"] == 2
    # joining an already joined trace keeps numbering going
    three = dc.concatenate_legs([both, out])
    assert three["leg"].max() == 2 and len(three.attrs["leg_starts"]) == 3


def test_concatenate_moving_junction_follows_interval_rule():
    a = dc.from_segments([{"length": 1000.0, "speed": 20.0, "grade": 0.02}], end_at_rest=False)
    b = dc.from_segments([{"length": 1000.0, "speed": 20.0, "grade": 0.02}], start_at_rest=False)
    both = dc.concatenate_legs([a, b])
    assert_trace_contract(both, 1.0)
    assert both["distance"].iloc[-1] == pytest.approx(
        a["distance"].iloc[-1] + b["distance"].iloc[-1] + 20.0 / a.attrs["time_scale"], rel=1e-3)


def test_concatenate_errors():
    one = dc.from_segments([{"length": 500.0, "speed": 10.0}], dt=1.0)
    two = dc.from_segments([{"length": 500.0, "speed": 10.0}], dt=2.0)
    with pytest.raises(InputError, match="time step") as err:
        dc.concatenate_legs([one, two])
    assert err.value.where == "legs[1]"
    with pytest.raises(InputError, match="no legs"):
        dc.concatenate_legs([])
    with pytest.raises(InputError, match="no legs"):
        dc.concatenate_legs(one)  # a single trace, not a list
    assert len(dc.concatenate_legs(iter([one, one]))) == 2 * len(one)
    with pytest.raises(InputError, match="missing column"):
        dc.concatenate_legs([one, one.drop(columns="grade")])


# ------------------------------------------------------------------------- summary
def test_trace_summary_on_hand_made_trace():
    tr = pd.DataFrame({
        "time": [0.0, 1, 2, 3, 4, 5, 6, 7],
        "speed": [0.0, 2, 2, 0, 0, 2, 2, 0],
        "grade": [0.0, 0.1, -0.05, 0, 0, 0, 0, 0],
    })
    tr["distance"] = np.concatenate(([0.0], np.cumsum(0.5 * (tr.speed[1:].values
                                                              + tr.speed[:-1].values))))
    tr["elevation"] = np.concatenate(([0.0], np.cumsum(tr.grade[:-1].values
                                                       * np.diff(tr.distance))))
    tr["leg"] = 0
    s = dc.trace_summary(tr[list(dc.COLUMNS)])
    # intervals with mean speed > 0.5 m/s: 0-1, 1-2, 2-3, 4-5, 5-6, 6-7 → 6 s moving
    assert s["moving_time"] == 6.0 and s["duration"] == 7.0
    assert s["distance"] == 8.0 and s["mean_moving_speed"] == pytest.approx(8 / 6)
    assert s["stops"] == 1
    assert s["climb"] == pytest.approx(0.2) and s["descent"] == pytest.approx(0.05)
    assert s["max_grade"] == 0.1 and s["min_grade"] == -0.05


def test_trace_summary_of_standing_truck():
    tr = dc.resample([0, 10], [0, 0], [5, 5], dt=1.0, speed=[0, 0])
    s = dc.trace_summary(tr)
    assert s["stops"] == 0 and s["moving_time"] == 0 and s["mean_moving_speed"] == 0.0


# ------------------------------------------------------------------------- examples
@pytest.mark.parametrize("name", ["example-trace.csv", "example-track.gpx"])
def test_example_inputs_load(name):
    path = ROOT / "inputs" / name
    assert path.stat().st_size < 200_000
    reader = dc.read_csv_trace if name.endswith(".csv") else dc.read_gpx_trace
    tr = reader(path)
    assert_trace_contract(tr, 1.0)
    summary = dc.trace_summary(tr)
    assert 120 < summary["duration"] < 1200 and summary["climb"] > 10
    assert tr.attrs["climb_after_smoothing"] < tr.attrs["climb_before_smoothing"]


def test_whole_file_reader_equals_the_checked_reader(tmp_path):
    """The fast whole-file parse gives exactly what the row-by-row checked reader gives,
    including line numbers, on a regular file with comments above the header and CRLF
    line ends; an irregular file (a comment inside the data) takes the checked path."""
    from tco.dutycycle import _fast_file, _read_csv_table, _read_csv_table_checked

    src = Path(__file__).parent.parent / "inputs" / "example-trace.csv"
    crlf = tmp_path / "crlf.csv"
    crlf.write_bytes(src.read_bytes().replace(b"\n", b"\r\n"))
    for f in (src, crlf):
        assert _fast_file(f) is not None
        fast, checked = _read_csv_table(f), _read_csv_table_checked(f)
        assert fast[1] == checked[1] and fast[3] == checked[3]
        np.testing.assert_array_equal(fast[2], checked[2])
        for k in checked[0]:
            np.testing.assert_array_equal(fast[0][k], checked[0][k])
    odd = tmp_path / "odd.csv"
    lines = src.read_text().splitlines()
    odd.write_text("\n".join(lines[:10] + ["# a note in the middle"] + lines[10:]) + "\n")
    assert _fast_file(odd) is None
    cols, _, line_no, _ = _read_csv_table(odd)
    assert len(line_no) == len(lines) - 3 and 11 not in set(line_no.tolist())  # 2 notes, header


def test_concatenate_legs_keeps_the_parked_marks():
    a = dc.from_segments([{"length": 300.0, "speed": 10.0}])
    b = dc.from_segments([{"length": 300.0, "speed": 10.0}])
    a = a.assign(parked=np.arange(len(a)) >= len(a) - 3)  # the last three samples parked
    both = dc.concatenate_legs([a, b])
    assert both["parked"].tolist() == [False] * (len(a) - 3) + [True] * 3 + [False] * len(b)
    assert "parked" not in dc.concatenate_legs([b, b]).columns


@pytest.mark.parametrize("sigma", [0.3, 2.0, 12.5, 31.7])
def test_gaussian_kernel_convolution_equals_scipy_gaussian_filter1d(sigma):
    """The smoothing's kernel applied with numpy.convolve equals
    scipy.ndimage.gaussian_filter1d (truncate=4, mode 'nearest') away from the ends of a
    random walk, to 1e-12 m (rounding of the sums)."""
    from scipy.ndimage import gaussian_filter1d

    from tco.dutycycle import _gaussian_kernel

    x = np.cumsum(np.random.default_rng(1).standard_normal(3000)) + 300.0
    k = _gaussian_kernel(sigma)
    r = k.size // 2
    ref = gaussian_filter1d(x, sigma, mode="nearest", truncate=4.0)[r:x.size - r]
    np.testing.assert_allclose(np.convolve(x, k, mode="valid"), ref, rtol=0, atol=1e-12)
