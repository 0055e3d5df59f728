"""The report's figures (report.figures) and the `wave` images: drawn from results, sized and
zoomed as documented."""

from __future__ import annotations

import subprocess
import sys
from pathlib import Path

import numpy as np
import pytest

from stringcheck.report.figures import wave_figure
from stringcheck.report.waveform import TrialWaveform

ROOT = Path(__file__).resolve().parents[2]
EXAMPLE = ROOT / "examples" / "precipitator-30kv.toml"


def _settling(tau: float, end: float) -> TrialWaveform:
    """Two stages charging as V (1 - exp(-t / tau)), a first-order step (any circuits text)."""
    time = np.linspace(0.0, end, 4001)
    rise = 1.0 - np.exp(-time / tau)
    voltage = np.stack([1000.0 * rise, 800.0 * rise], axis=1)
    current = -np.exp(-time / tau)
    return TrialWaveform(time=time, current=current, voltage=voltage,
                         capacitor_voltage=voltage)


def test_the_wave_images_are_an_svg_and_a_png():
    waveform = _settling(1e-6, 20e-6)
    svg = wave_figure(waveform, limits=[1200.0, 1200.0], window=(0.0, 5e-6), title="two stages")
    assert svg.startswith("<svg") and "two stages" in svg and "limit: derating x V_RRM" in svg
    png = wave_figure(waveform, limits=[1200.0, 1200.0], window=(0.0, 5e-6), image="png")
    assert png[:8] == b"\x89PNG\r\n\x1a\n"


def test_wave_writes_the_images_and_refuses_a_bad_window(tmp_path):
    png, svg = tmp_path / "t.png", tmp_path / "t.svg"
    run = subprocess.run([sys.executable, "-m", "stringcheck", "wave", str(EXAMPLE), "--trial",
                          "3", "--png", str(png), "--svg", str(svg), "--window", "2 us"],
                         capture_output=True, text=True)
    assert run.returncode == 0, run.stderr
    assert png.read_bytes()[:4] == b"\x89PNG" and svg.read_text().startswith("<svg")
    # The time axis of the SVG ends at the window asked for (2 us; its tick labels in us).
    assert ">2.00<" in svg.read_text() or ">2.0<" in svg.read_text()
    bad = subprocess.run([sys.executable, "-m", "stringcheck", "wave", str(EXAMPLE), "--png",
                          str(tmp_path / "x.png"), "--window", "fast"], capture_output=True,
                         text=True)
    assert bad.returncode == 2 and bad.stderr.count("\n") == 1 and "--window" in bad.stderr
    assert not (tmp_path / "x.png").exists()
