"""sensormodel.shaping: spectrum files → shaping filter → a noise model with its provenance.

Reference values: the example file's resonance (ω0 = 2π·0.25 rad/s, ζ = 0.1, written in its
comments) and a first-order spectrum S(ω) = 1/(1 + ω²), whose stable factor is H(s) = 1/(s + 1)
and whose variance is ∫ S df over all f = (1/2π)·∫ dω/(1 + ω²) = 1/2.
"""

from __future__ import annotations

import pathlib

import numpy as np
import pytest
from numpy.testing import assert_allclose

from sensormodel import build_model
from sensormodel.errors import AnalysisError, DatasheetError, RecordingError
from sensormodel.recording import read_recording
from sensormodel.shaping import (
    DEFAULT_CHANNEL,
    SHAPED_PSD_CONVENTION,
    read_spectrum_csv,
    read_spectrum_table,
    recording_spectrum,
    shape,
)
from sensormodel.spectrum import welch

EXAMPLE = pathlib.Path(__file__).resolve().parent.parent / "examples" / "spectra"


def test_read_spectrum_table_of_the_example() -> None:
    table = read_spectrum_table(str(EXAMPLE / "tern4-mast-sway.toml"))
    assert table.channel == "accelerometer.y"
    assert table.sample_rate == 200.0
    assert table.name == "Tern-4 mast sway (fictional)"
    assert table.numerator == [0.0004]
    assert table.denominator == [1.0, -4.836106, 6.088068]


def test_read_spectrum_table_in_omega(tmp_path) -> None:
    # N(ω) = 1 and D(ω) = ω² + 1, written in powers of ω: the same as [1] / [1, 1] in ω²
    path = tmp_path / "s.toml"
    path.write_text("[spectrum]\nnumerator_omega = [1.0]\ndenominator_omega = [1.0, 0.0, 1.0]\n")
    table = read_spectrum_table(str(path))
    assert_allclose(table.numerator, [1.0], rtol=0, atol=0)
    assert_allclose(table.denominator, [1.0, 1.0], rtol=0, atol=0)
    assert table.channel is None and table.sample_rate is None


@pytest.mark.parametrize(
    ("text", "error", "message"),
    [
        ("[other]\nx = 1\n", DatasheetError, "{p}:spectrum: no [spectrum] table"),
        ("[spectrum\n", DatasheetError, "{p}: not valid TOML"),
        (
            "[spectrum]\nnumerator = [1.0]\ndenominator = [1.0, 1.0]\ngain = 2\n",
            DatasheetError,
            "{p}:spectrum.gain: unknown key 'gain'",
        ),
        ("[spectrum]\nnumerator = [1.0]\n", DatasheetError, "{p}:spectrum.denominator: no denom"),
        (
            "[spectrum]\nnumerator = [1.0]\nnumerator_omega = [1.0]\ndenominator = [1.0]\n",
            DatasheetError,
            "{p}:spectrum.numerator: both numerator and numerator_omega",
        ),
        (
            "[spectrum]\nnumerator_omega = [1.0, 1.0]\ndenominator = [1.0, 1.0]\n",
            AnalysisError,
            "{p}:spectrum.numerator_omega: ",
        ),
    ],
    ids=["no-table", "not-toml", "unknown-key", "no-denominator", "both-forms", "odd-power"],
)
def test_read_spectrum_table_refusals(tmp_path, text, error, message) -> None:
    path = tmp_path / "bad.toml"
    path.write_text(text)
    with pytest.raises(error) as info:
        read_spectrum_table(str(path))
    assert str(info.value).startswith(message.format(p=path)), str(info.value)


def test_read_spectrum_csv(tmp_path) -> None:
    path = tmp_path / "psd.csv"
    path.write_text("# measured\nfrequency [Hz];psd\n0.1;2e-6\n\n1\t3e-6\n10,4e-6\n")
    f, p = read_spectrum_csv(str(path))
    assert_allclose(f, [0.1, 1.0, 10.0], rtol=0)
    assert_allclose(p, [2e-6, 3e-6, 4e-6], rtol=0)
    path.write_text("f,p\n0.1,1\n1,x\n")
    with pytest.raises(RecordingError, match=r"psd.csv:line 3: cannot read '1,x'"):
        read_spectrum_csv(str(path))
    path.write_text("f,p\n0.1,1\n1,2\n")
    with pytest.raises(RecordingError, match="2 data lines; expected at least 3"):
        read_spectrum_csv(str(path))


def test_shape_factorizes_a_table_into_a_new_model(tmp_path) -> None:
    path = tmp_path / "first.toml"
    path.write_text("[spectrum]\nnumerator = [1.0]\ndenominator = [1.0, 1.0]\nchannel = 'gyro.x'\n")
    with pytest.raises(AnalysisError, match="no output rate"):
        shape(str(path))
    result = shape(str(path), rate=100.0)
    assert result.fit is None and result.channel == "gyro.x"
    assert_allclose(result.filter.denominator, [1.0, 1.0], rtol=1e-12)
    assert_allclose(result.filter.numerator, [1.0], rtol=1e-12)
    assert result.term.variance() == pytest.approx(0.5, rel=1e-12)
    (ch,) = result.model.channels
    assert (ch.id, ch.quantity, ch.unit, ch.sample_rate) == ("gyro.x", "angular_rate", "rad/s", 100)
    assert result.model.provenance == {
        "created_by": "sensormodel",
        "from": "spectrum",
        "spectrum": {"file": str(path)},
    }
    assert result.model.conventions["psd"] == SHAPED_PSD_CONVENTION
    assert result.term.meta == {"origin": "spectral factorization"}
    # a channel id of no known instrument stays as recorded
    other = shape(str(path), channel="strain.x", rate=10.0).model.channels[0]
    assert (other.quantity, other.unit) == ("as_recorded", "1")


def test_shape_fits_a_csv_and_adds_to_a_model(tmp_path) -> None:
    # one-sided PSD of 0.01/(s² + s + 9): a fit of orders 0/2 recovers the denominator
    f = np.logspace(-1, 1.5, 80)
    s = 2j * np.pi * f
    psd = 2 * np.abs(0.01 / (s**2 + 1.0 * s + 9.0)) ** 2
    csv = tmp_path / "psd.csv"
    csv.write_text("".join(f"{a:.17g},{b:.17g}\n" for a, b in zip(f, psd, strict=True)))
    base = build_model(EXAMPLE.parent / "bw-t900.toml")
    result = shape(str(csv), channel="accelerometer.z", orders=(0, 2), add_to=base)
    assert result.fit is not None and result.fit.rms_db < 0.01
    assert_allclose(result.filter.denominator, [1.0, 1.0, 9.0], rtol=1e-4)
    assert result.term.meta["fit"]["orders"] == [0, 2]
    before = base.channel("accelerometer.z").terms
    after = result.model.channel("accelerometer.z").terms
    assert after[:-1] == before and after[-1] is result.term
    assert result.model.channel("gyro.x") == base.channel("gyro.x")


def test_shape_of_a_recording_uses_its_longest_segment(tmp_path) -> None:
    rng = np.random.default_rng(2)
    x = rng.standard_normal(6000)
    t = np.delete(np.arange(6100) / 50.0, np.s_[2000:2100])  # a logger lost 100 samples
    path = tmp_path / "rec.npz"
    np.savez(path, time=t, gyro_x=x)
    rec = read_recording(path, unit={"time": "s", "gyro_x": "rad/s"}, gaps="split")
    f, p = recording_spectrum(rec, "gyro.x")
    ref = welch(x[2000:], 50.0)
    assert_allclose(f, ref.f[1:], rtol=0)
    assert_allclose(p, ref.psd[1:], rtol=1e-12)
    result = shape(str(path), recording=rec, orders=(0, 1))
    assert result.channel == "gyro.x" and result.model.channels[0].sample_rate == 50.0
    with pytest.raises(AnalysisError, match="no channel 'gyro.q'"):
        recording_spectrum(rec, "gyro.q")


def test_shape_without_a_channel_uses_the_default(tmp_path) -> None:
    path = tmp_path / "s.toml"
    path.write_text("[spectrum]\nnumerator = [1.0]\ndenominator = [1.0, 1.0]\nsample_rate = '5 Hz'")
    result = shape(str(path))
    assert result.channel == DEFAULT_CHANNEL == "gyro.z"
    assert result.model.channels[0].sample_rate == 5.0
    assert result.model.sensor == {"name": f"shaped noise ({path})"}
