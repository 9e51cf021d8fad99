"""base-excitation with input = "support-displacement": u relative to the support from
m u″ + c u′ + k u = −m y″, and the absolute displacement x = u + y.

References: the transmissibility of harmonic support motion (Chopra, Dynamics of Structures,
ch. 3), scipy.signal.step on the transfer function (c s + k)/(m s² + c s + k) of the
absolute displacement, and the located input errors.
"""

from __future__ import annotations

import math

import numpy
import pytest
from scipy import signal

from tests.conftest import derive_text

from .test_case_errors import assert_message

HARMONIC = """
    title = "Harmonic support motion"
    [system]
    model = "base-excitation"
    input = "support-displacement"
    mass = "1 kg"
    stiffness = "100 N/m"
    damping_ratio = {zeta}
    [[load]]
    shape = "formula"
    expr = "0.01*sin({omega}*tau)"
    duration = "{duration} s"
    [report]
    until = "{duration} s"
    """


def steady_amplitude(times, values, omega) -> float:
    """Amplitude of a pure sinusoid of angular frequency ω by least squares on sin and cos."""
    basis = numpy.column_stack([numpy.sin(omega * times), numpy.cos(omega * times)])
    (a, b), *_ = numpy.linalg.lstsq(basis, values, rcond=None)
    return math.hypot(a, b)


@pytest.mark.parametrize(("zeta", "ratio"), [(0.1, 0.5), (0.1, 1.0), (0.1, math.sqrt(2)),
                                             (0.2, 2.0), (0.05, 3.0)])
def test_transmissibility_of_harmonic_support_motion_chopra(zeta, ratio):
    # Chopra, Dynamics of Structures, ch. 3 (harmonic vibration, vibration isolation: ground
    # motion): the steady-state absolute displacement over the support displacement is
    # TR = √((1 + (2ζr)²)/((1 − r²)² + (2ζr)²)), r = ω/ω_n; TR = 1 at r = √2 for every ζ.
    # The relative displacement's amplitude is r²/√((1 − r²)² + (2ζr)²) of the support's.
    natural = 10.0
    omega = ratio * natural
    duration = 50.0 / zeta / natural          # the free vibration has decayed to e^−50
    d = derive_text(HARMONIC.format(zeta=zeta, omega=repr(omega), duration=repr(duration)))
    assert d.status == "verified"
    times = numpy.linspace(duration - 4 * math.pi / omega, duration * (1 - 1e-9), 4001)
    relative = d.evaluate(times)
    support = 0.01 * numpy.sin(omega * times)
    denominator = math.sqrt((1 - ratio**2) ** 2 + (2 * zeta * ratio) ** 2)
    tr = math.sqrt(1 + (2 * zeta * ratio) ** 2) / denominator
    assert steady_amplitude(times, relative + support, omega) / 0.01 == pytest.approx(tr, rel=1e-9)
    assert steady_amplitude(times, relative, omega) / 0.01 == pytest.approx(
        ratio**2 / denominator, rel=1e-9)
    absolute = d.to_dict()["peak_absolute_displacement"]
    assert abs(absolute["value"]) >= 0.01 * tr * (1 - 1e-9)    # the transient may add to it


def test_step_of_the_support_against_scipy():
    # absolute displacement x = u + y: X(s)/Y(s) = (c s + k)/(m s² + c s + k)
    m, k, zeta = 100.0, 40000.0, 0.1
    c = 2 * zeta * math.sqrt(k * m)
    d = derive_text("""
        title = "Support steps by 10 mm"
        [system]
        model = "base-excitation"
        input = "support-displacement"
        mass = "100 kg"
        stiffness = "40 kN/m"
        damping_ratio = 0.1
        [[load]]
        shape = "step"
        amplitude = "10 mm"
        [report]
        until = "1 s"
        """)
    assert d.status == "verified"
    times = numpy.linspace(1e-9, 1, 5001)
    _t, reference = signal.step(([c, k], [m, c, k]), T=times)
    relative = d.evaluate(times)
    assert numpy.max(numpy.abs(relative + 0.01 - 0.01 * reference)) <= 1e-9   # scipy: ~1e-8
    result = d.to_dict()
    # u jumps to −10 mm at the step (the mass has not moved yet): the peak relative value
    assert result["peak"]["value"] == pytest.approx(-0.01, rel=1e-12)
    assert result["peak"]["time"] == 0.0
    assert result["peak_absolute_displacement"]["value"] == pytest.approx(
        0.01 * numpy.max(reference), rel=1e-6)
    # the force through spring and damper is −m x″ (Newton's second law on the mass)
    force = d.evaluate(times, response="support_reaction")
    _t, impulse = signal.impulse(([c, k], [m, c, k]), T=times)
    acceleration = numpy.gradient(0.01 * impulse, times)
    inner = slice(5, -5)
    assert numpy.max(numpy.abs(force[inner] + m * acceleration[inner])) <= 1e-3 * numpy.max(
        numpy.abs(force))


BASE_SUPPORT = """\
title = "Moving support"
[system]
model = "base-excitation"
input = "support-displacement"
mass = "100 kg"
stiffness = "40 kN/m"
[[load]]
shape = "step"
amplitude = "10 mm"
"""


@pytest.mark.parametrize(("text", "expected"), [
    (BASE_SUPPORT.replace('"support-displacement"', '"support-velocity"'),
     "case.toml:4: system.input: unknown input 'support-velocity' (expected one of: "
     "support-acceleration, support-displacement)"),
    (BASE_SUPPORT.replace('"10 mm"', '"2 m/s^2"'),
     "case.toml:9: load[1].amplitude: wrong dimension (expected length, got length/time^2)"),
    (BASE_SUPPORT.replace('shape = "step"\namplitude = "10 mm"', 'shape = "impulse"\n'
                          'impulse = "1 mm*s"'),
     "case.toml:8: load[1].shape: an impulse is not a support displacement (a Dirac "
     "displacement has no finite response); give the displacement history, e.g. a step or a "
     "table"),
], ids=["unknown input", "acceleration given", "impulse"])
def test_bad_support_input(tmp_path, capsys, text, expected):
    assert_message(tmp_path, capsys, text, expected)
