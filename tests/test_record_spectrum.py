"""Response spectra of support-acceleration records (closedform.records) against checks from
outside the recurrence: the 30-digit Laplace route of ``derive`` on the same record, the
limits of the theory, and scipy's solve_ivp.

Records here are test inputs (seeded noise, a wavelet), never check values: the expected
numbers come from derive, scipy, or the theory's limits named beside each test.
"""

from __future__ import annotations

import csv
import io
import json
import math

import numpy
import pytest
from scipy.integrate import solve_ivp

from closedform.cli import main
from closedform.records import (
    Record,
    matrix_exponential_map,
    parse_periods,
    read_record,
    record_spectrum,
    step_map,
)


def noise_record(count=400, dt=0.01, seed=7, scale=2.0) -> Record:
    rng = numpy.random.default_rng(seed)
    t = numpy.arange(count) * dt
    a = rng.normal(size=count) * numpy.sin(math.pi * t / t[-1]) * scale
    return Record(t, a, "noise")


def continuous_peaks(record: Record, period: float, zeta: float, tail: float):
    """max |u| and max |u″ + a_g| of u″ + 2ζωu′ + ω²u = −a_g (a_g linear between samples,
    zero after the last), by DOP853 with tight tolerances, extremes located as events of
    u′ = 0 and of d/dt(2ζωu′ + ω²u) = 0 (never the largest sample)."""
    w = 2 * math.pi / period
    t, a = record.times, record.accelerations

    def ground(time):
        return float(numpy.interp(time, t, a)) if time <= t[-1] else 0.0

    def rhs(time, y):
        return [y[1], -ground(time) - 2 * zeta * w * y[1] - w * w * y[0]]

    def velocity(time, y):
        return y[1]

    def jerk(time, y):     # d/dt of −(2ζω u′ + ω² u) is −(2ζω u″ + ω² u′)
        return 2 * zeta * w * rhs(time, y)[1] + w * w * y[1]

    largest_u = largest_a = 0.0
    state = numpy.zeros(2)
    spans = [(t[i], t[i + 1]) for i in range(t.size - 1)] + [(t[-1], t[-1] + tail)]
    for start, end in spans:
        solution = solve_ivp(rhs, (start, end), state, method="DOP853", rtol=1e-12,
                             atol=1e-16, events=(velocity, jerk), dense_output=True)
        ends = [solution.y[:, 0], solution.y[:, -1]]
        for y in ends + list(solution.y_events[0]):
            largest_u = max(largest_u, abs(y[0]))
        for y in ends + list(solution.y_events[1]):
            largest_a = max(largest_a, abs(2 * zeta * w * y[1] + w * w * y[0]))
        state = solution.y[:, -1]
    return largest_u, largest_a


# ----------------------------------------------------------------------------- the map


@pytest.mark.parametrize("zeta", [0.0, 0.05, 0.4])
def test_segment_map_matches_the_matrix_exponential(zeta):
    """The closed-form map against e^(Ah) by eigen-decomposition (independent formulas)."""
    w = 2 * math.pi / numpy.geomspace(0.01, 10, 30)
    closed, independent = step_map(0.005, w, zeta), matrix_exponential_map(0.005, w, zeta)
    scale = numpy.max(numpy.abs(independent), axis=1, keepdims=True)
    assert numpy.max(numpy.abs(closed - independent) / scale) < 1e-8


def test_undamped_free_vibration_map_is_a_rotation():
    """ζ = 0, no input: [u, v/ω] turns by ωh (Chopra, Dynamics of Structures, 4th ed.,
    section 2.1, free vibration u = u₀ cos ωt + (v₀/ω) sin ωt; from memory)."""
    w = numpy.array([3.0])
    m = step_map(0.2, w, 0.0)[:, :, 0]
    c, s = math.cos(0.6), math.sin(0.6)
    assert m[:, :2] == pytest.approx(numpy.array([[c, s / 3], [-3 * s, c]]), rel=1e-14)


# ----------------------------------------------------------------------------- independent integration


@pytest.mark.parametrize("period, zeta", [(0.02, 0.05), (0.013, 0.02), (0.3, 0.05),
                                           (2.0, 0.0), (1.1, 0.2)])
def test_against_solve_ivp(period, zeta):
    record = noise_record()
    spectrum = record_spectrum(record, zeta, numpy.array([period]))
    assert spectrum.status == "verified"
    expected_u, expected_a = continuous_peaks(record, period, zeta, tail=period)
    assert spectrum.displacement[0] == pytest.approx(expected_u, rel=1e-7)
    assert spectrum.absolute_acceleration[0] == pytest.approx(expected_a, rel=1e-7)


def test_short_periods_peak_between_samples():
    """At T = 0.02 s with Δt = 0.01 s a sampled maximum underestimates by up to about
    (ωΔt)²/8 (common practice); the reported peak is the continuous one (solve_ivp) and is
    larger than every sample."""
    record = noise_record(count=200)
    w = 2 * math.pi / 0.02
    spectrum = record_spectrum(record, 0.05, numpy.array([0.02]))
    expected, _ = continuous_peaks(record, 0.02, 0.05, tail=0.02)
    samples = numpy.zeros(2)
    largest_sample = 0.0
    m = step_map(0.01, numpy.array([w]), 0.05)[:, :, 0]
    for i in range(record.times.size - 1):
        samples = m @ numpy.array([*samples, record.accelerations[i],
                                   record.accelerations[i + 1]])
        largest_sample = max(largest_sample, abs(samples[0]))
    assert spectrum.displacement[0] == pytest.approx(expected, rel=1e-7)
    assert spectrum.displacement[0] > largest_sample * (1 + 1e-3)


def test_free_vibration_after_the_record_counts():
    """A record ending in motion: the largest |u| comes after the last sample (the ground at
    rest); solve_ivp over the record and the free vibration finds the same peak."""
    t = numpy.array([0.0, 0.05, 0.1])
    record = Record(t, numpy.array([0.0, 5.0, 0.0]), "kick")
    spectrum = record_spectrum(record, 0.05, numpy.array([1.0]))
    expected, _ = continuous_peaks(record, 1.0, 0.05, tail=1.0)
    assert spectrum.displacement_time[0] > t[-1]
    assert spectrum.displacement[0] == pytest.approx(expected, rel=1e-8)


def test_uneven_sampling_groups_segment_lengths():
    record = noise_record(count=120)
    t = record.times.copy()
    t[60:] = t[60] + (t[60:] - t[60]) * 1.5          # the second half at 15 ms
    uneven = Record(t, record.accelerations, "uneven")
    spectrum = record_spectrum(uneven, 0.05, numpy.array([0.05, 0.5]))
    for k, period in enumerate((0.05, 0.5)):
        expected_u, _ = continuous_peaks(uneven, period, 0.05, tail=period)
        assert spectrum.displacement[k] == pytest.approx(expected_u, rel=1e-7)


# ----------------------------------------------------------------------------- derive's 30-digit route


@pytest.mark.parametrize("period", [0.1, 0.7])
def test_against_the_30_digit_route_of_derive(tmp_path, capsys, period):
    """The same record as a table load on a base-excitation case (m = 1 kg, k = ω²):
    derive's exact Laplace route at 30 digits gives the peak relative displacement and the
    peak absolute acceleration; they agree to 1e-9 of the peak."""
    record = noise_record(count=40, seed=3)
    zeta = 0.05
    stiffness = (2 * math.pi / period) ** 2
    points = ", ".join(f"[{float(t)!r}, {float(a)!r}]"
                       for t, a in zip(record.times, record.accelerations))
    until = float(record.times[-1]) + period
    (tmp_path / "c.toml").write_text(f'''
title = "record check"
[system]
model = "base-excitation"
mass = "1 kg"
stiffness = "{stiffness!r} N/m"
damping_ratio = {zeta}
[[load]]
shape = "table"
points = [{points}]
[report]
until = "{until!r} s"
''')
    assert main(["derive", str(tmp_path / "c.toml"), "--json", "-"]) == 0
    result = json.loads(capsys.readouterr().out)
    assert result["status"] == "verified"
    spectrum = record_spectrum(record, zeta, numpy.array([2 * math.pi / math.sqrt(stiffness)]))
    assert spectrum.displacement[0] == pytest.approx(abs(result["peak"]["value"]), rel=1e-9)
    assert spectrum.absolute_acceleration[0] == pytest.approx(
        abs(result["peak_absolute_acceleration"]["value"]), rel=1e-9)


# ----------------------------------------------------------------------------- limits


def test_pseudo_acceleration_tends_to_the_peak_ground_acceleration_at_short_periods():
    """T → 0: the oscillator moves with the ground, ω²D → peak ground acceleration (Chopra,
    Dynamics of Structures, 4th ed., section 6.8, the short-period end of the spectrum; from
    memory). A smooth record (a half-sine of 1 s, 200 samples): within 0.2 % at T = 1 ms."""
    t = numpy.linspace(0.0, 1.0, 201)
    record = Record(t, 3.0 * numpy.sin(math.pi * t) ** 2, "smooth")
    spectrum = record_spectrum(record, 0.05, numpy.array([1e-3]))
    (point,) = spectrum.points()
    assert point["pseudo_acceleration"] == pytest.approx(3.0, rel=2e-3)
    assert point["absolute_acceleration"] == pytest.approx(3.0, rel=2e-3)


def ground_displacement_peak(record: Record) -> tuple[float, float, float]:
    """Largest |u_g|, and the final u_g and u_g′, integrating a_g (linear between samples)
    exactly: per segment u_g is a cubic, sampled densely (1e-4 of the segment)."""
    t, a = record.times, record.accelerations
    x = v = 0.0
    largest = 0.0
    for i in range(t.size - 1):
        h, slope = t[i + 1] - t[i], (a[i + 1] - a[i]) / (t[i + 1] - t[i])
        tau = numpy.linspace(0.0, h, 10001)
        cubic = x + v * tau + a[i] * tau**2 / 2 + slope * tau**3 / 6
        largest = max(largest, float(numpy.max(numpy.abs(cubic))))
        x, v = x + v * h + a[i] * h * h / 2 + slope * h**3 / 6, v + a[i] * h + slope * h * h / 2
    return largest, x, v


def test_spectral_displacement_tends_to_the_peak_ground_displacement_at_long_periods():
    """T → ∞: the mass stays put, D → peak ground displacement, for a record that brings the
    ground back to rest (Chopra, Dynamics of Structures, 4th ed., section 6.8, the
    long-period end; from memory). A wavelet +p, −2p, +p of triangles ends with zero ground
    velocity and displacement; at T = 500 s within 0.1 %."""
    t = numpy.round(numpy.arange(0, 151) * 0.01, 10)
    triangle = lambda s: numpy.clip(1 - numpy.abs(s - 0.1) / 0.1, 0, None)   # noqa: E731
    a = triangle(t) - 2 * triangle(t - 0.5) + triangle(t - 1.0)
    record = Record(t, a, "wavelet")
    largest, final_x, final_v = ground_displacement_peak(record)
    assert abs(final_v) < 1e-12 and abs(final_x) < 1e-12
    spectrum = record_spectrum(record, 0.05, numpy.array([500.0]))
    assert spectrum.displacement[0] == pytest.approx(largest, rel=1e-3)


# ----------------------------------------------------------------------------- reading and command line


def test_periods_ranges_are_log_spaced_and_lists_are_taken_as_given():
    periods = parse_periods("0.02:5:200")
    assert periods.size == 200 and periods[0] == pytest.approx(0.02) and periods[-1] == 5
    assert numpy.allclose(numpy.diff(numpy.log(periods)), math.log(250) / 199)
    assert list(parse_periods("0.1,0.5,1")) == [0.1, 0.5, 1.0]


def test_header_units_are_applied(tmp_path):
    (tmp_path / "r.csv").write_text("# a comment\ntime [ms], acceleration [g0]\n0, 0\n10, 0.5\n"
                                    "20, -0.25\n")
    record = read_record(tmp_path / "r.csv")
    assert list(record.times) == pytest.approx([0, 0.01, 0.02])
    # standard gravity 9.80665 m/s² (CGPM 1901, the conventional value)
    assert list(record.accelerations) == pytest.approx([0, 0.5 * 9.80665, -0.25 * 9.80665])


def write_record(path, count=300):
    record = noise_record(count=count)
    with open(path, "w") as stream:
        stream.write("time [s], acceleration [m/s^2]\n")
        for t, a in zip(record.times, record.accelerations):
            stream.write(f"{float(t)!r}, {float(a)!r}\n")


def test_command_json_contract(tmp_path, capsys):
    write_record(tmp_path / "r.csv")
    code = main(["spectrum", "--record", str(tmp_path / "r.csv"), "--damping-ratio", "0.05",
                 "--periods", "0.05,0.5,2", "--json", "-"])
    result = json.loads(capsys.readouterr().out)
    assert code == 0
    assert {"schema", "damping_ratio", "points", "status"} <= set(result)
    assert result["schema"] == 1 and result["status"] == "verified"
    assert result["damping_ratio"] == 0.05
    assert [set(p) for p in result["points"]] == [{"period", "displacement", "pseudo_velocity",
                                                    "pseudo_acceleration",
                                                    "absolute_acceleration"}] * 3
    for p in result["points"]:
        w = 2 * math.pi / p["period"]
        assert p["pseudo_velocity"] == pytest.approx(w * p["displacement"], rel=1e-15)
        assert p["pseudo_acceleration"] == pytest.approx(w * w * p["displacement"], rel=1e-15)


def test_command_writes_csv_json_svg_png_reproducibly(tmp_path):
    write_record(tmp_path / "r.csv")
    arguments = ["spectrum", "--record", str(tmp_path / "r.csv"), "--periods", "0.05:3:12"]
    assert main(arguments + ["-o", str(tmp_path / "a")]) == 0
    assert main(arguments + ["-o", str(tmp_path / "b")]) == 0
    names = sorted(p.name for p in (tmp_path / "a").iterdir())
    assert names == ["record-spectrum.csv", "record-spectrum.json", "record-spectrum.png",
                     "record-spectrum.svg"]
    for name in names:
        assert (tmp_path / "a" / name).read_bytes() == (tmp_path / "b" / name).read_bytes()
    rows = [r for r in csv.reader(io.StringIO((tmp_path / "a" / "record-spectrum.csv")
                                              .read_text())) if not r[0].startswith("#")]
    assert rows[0] == ["period [s]", "displacement [m]", "pseudo_velocity [m/s]",
                       "pseudo_acceleration [m/s^2]", "absolute_acceleration [m/s^2]"]
    assert len(rows) == 13


@pytest.mark.parametrize("content, arguments, message", [
    ("0, 0\n0.01, 1\n", ["--periods", "0.1", "--shape", "rectangle"],
     "--shape: is for a pulse spectrum, not with --record"),
    ("0, 0\n0.01, 1\n", [], "--periods: missing (a record spectrum needs --periods "
                            "START:STOP:COUNT or a list A,B,…, in seconds)"),
    ("0, 0\n0.01, 1\n", ["--periods", "0.1:1"],
     "--periods: expected START:STOP:COUNT or a list A,B,…, got '0.1:1'"),
    ("0, 0\n0.01, 1\n", ["--periods", "1:0.1:5"],
     "--periods: expected 0 < START ≤ STOP, got '1:0.1:5'"),
    ("0, 0\n0.01, 1\n", ["--periods", "0.1,-1"],
     "--periods: periods must be positive, got '0.1,-1'"),
    ("0, 0\n0.01, 1\n", ["--periods", "0.1,x"],
     "--periods: 'x' is not a number (expected a period in s)"),
    ("0, 0\n0.01, 1\n0.01, 2\n", ["--periods", "0.1"],
     "{file}:3: times must increase from row to row (got 0.01 after 0.01)"),
    ("t [s], a [N]\n0, 0\n0.01, 1\n", ["--periods", "0.1"],
     "{file}:1: column 2: wrong unit in the header (expected a unit of length/time^2, got "
     "force)"),
    ("0, 0\n0.01, 1 g0\n", ["--periods", "0.1"],
     "{file}:2: column 2: not a plain number (expected a number such as 0.25 or -1.5e3, "
     "units in the header), got '1 g0'"),
    ("0, 0\n0.01\n", ["--periods", "0.1"],
     "{file}:2: expected two columns (time, acceleration), got 1"),
    ("0, 0\n", ["--periods", "0.1"],
     "{file}: fewer than two samples (expected rows of time, acceleration)"),
])
def test_bad_record_input_gives_one_line_and_exit_2(tmp_path, capsys, content, arguments,
                                                    message):
    path = tmp_path / "r.csv"
    path.write_text(content)
    code = main(["spectrum", "--record", str(path), *arguments])
    captured = capsys.readouterr()
    assert code == 2
    assert captured.out == ""
    assert captured.err.strip().splitlines() == [message.format(file=path)]


def test_periods_far_below_the_sampling_interval_are_refused(tmp_path, capsys):
    path = tmp_path / "r.csv"
    path.write_text("0, 0\n0.01, 1\n0.02, 0\n")
    assert main(["spectrum", "--record", str(path), "--periods", "1e-5,1"]) == 2
    assert capsys.readouterr().err.strip() == (
        "--periods: the shortest period, 1e-05 s, is below 1/500 of the longest sampling "
        "interval of the record (0.01 s); at such periods the pseudo-acceleration is the peak "
        "ground acceleration")


def test_a_non_finite_peak_fails_and_the_json_stays_strict():
    """An overflowing record (1e307 m/s²) on a long period: status failed, JSON null."""
    record = Record(numpy.array([0.0, 1.0, 2.0]), numpy.array([0.0, 1e307, -1e307]), "huge")
    spectrum = record_spectrum(record, 0.05, numpy.array([50.0]))
    assert spectrum.status == "failed"
    text = spectrum.to_json()
    assert "NaN" not in text and "Infinity" not in text
    json.loads(text)
