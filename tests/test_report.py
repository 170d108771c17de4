"""Verdict reports: the JSON document against its schema, the text summary, the HTML page.

The HTML page is parsed with the standard library's html.parser (html5lib too when installed);
it must embed every figure as a PNG data URI, fetch nothing from a network, and carry every
text that came from an input escaped (a datasheet may name its sensor ``<script>…``).
"""

from __future__ import annotations

import base64
import copy
import dataclasses
import html
import json
import pathlib
from html.parser import HTMLParser
from types import SimpleNamespace

import jsonschema
import numpy as np
import pytest
from conftest import SCHEMAS

from sensormodel import acceptance as acc
from sensormodel import spectrum
from sensormodel.allan import overlapping
from sensormodel.datasheet import load_datasheet
from sensormodel.report import (
    SAFETY_CAUTION,
    VERDICT_SCHEMA_ID,
    display_values,
    format_duration,
    identify_notes,
    identify_rows,
    identify_table,
    reason_text,
    verdict_document,
    verdict_html,
    verdict_text,
    write_verdict_html,
    write_verdict_json,
)
from sensormodel.terms import FLICKER_FLOOR_FACTOR

HOSTILE = '<script>alert("x")</script> & "BW" <b>'

_SHEET = f"""
[sensor]
name = '{HOSTILE}'
model = "<img src=x onerror=alert(1)>"
manufacturer = "Brackwater & Sons <fictional>"
sample_rate = "20 Hz"
axes = ["x", "z"]
[gyro]
angle_random_walk = {{ typ = "0.01 deg/rt-hr", max = "0.02 deg/rt-hr" }}
bias_instability = {{ max = "0.1 deg/h" }}
bias_repeatability = "0.5 dph"
"""

PNG_MAGIC = b"\x89PNG\r\n\x1a\n"


def _fit(white, flicker):
    return SimpleNamespace(
        terms=(
            SimpleNamespace(
                term="white",
                parameter="density",
                estimate=white[0],
                low=white[1],
                high=white[2],
                supported=True,
            ),
            SimpleNamespace(
                term="flicker",
                parameter="coefficient",
                estimate=flicker[0],
                low=flicker[1],
                high=flicker[2],
                supported=True,
            ),
        )
    )


@pytest.fixture(scope="module")
def report(tmp_path_factory):
    """A report with one channel passing and one inconclusive, from a real Allan curve."""
    path = tmp_path_factory.mktemp("sheet") / "sheet.toml"
    path.write_text(_SHEET, encoding="utf-8")
    ds = load_datasheet(path)
    rng = np.random.default_rng(5)
    rate = 20.0
    n_lim = 0.02 * np.pi / 180 / 60
    y = rng.normal(0.0, 0.5 * n_lim * np.sqrt(rate), 20 * 600)  # 10 min of white noise
    curve = overlapping(y, rate, confidence=0.9, unit="rad/s", channel="gyro.x")
    b_lim = 0.1 * np.pi / 180 / 3600 / FLICKER_FLOOR_FACTOR
    fits = {
        "gyro.x": _fit((0.5 * n_lim, 0.48 * n_lim, 0.52 * n_lim), (0.1 * b_lim, 0.0, 0.5 * b_lim)),
        "gyro.z": _fit(
            (0.5 * n_lim, 0.48 * n_lim, 0.52 * n_lim), (0.9 * b_lim, 0.5 * b_lim, 1.6 * b_lim)
        ),
    }
    channels = []
    for ax in ds.channels():
        cv = acc.verify_curve(curve, ax, duration=600.0, identification=fits[ax.channel_id])
        psd = spectrum.log_bins(spectrum.welch(y, rate), per_decade=20)
        channels.append(dataclasses.replace(cv, psd=psd))
    return acc.VerdictReport(
        channels=tuple(channels),
        confidence=0.9,
        against="max",
        power=0.8,
        datasheet={
            "file": str(path),
            "sha256": ds.sha256,
            "sensor": {k: v for k, v in ds.sensor.items() if isinstance(v, str)},
        },
        recording={"file": "rec<1>.csv", "duration": 600.0, "sample_rate": rate, "samples": y.size},
    ).with_notes("a note with <tags> & ampersands")


def _validator():
    schema = json.loads((SCHEMAS / "verdict-report.schema.json").read_text(encoding="utf-8"))
    jsonschema.Draft202012Validator.check_schema(schema)
    return jsonschema.Draft202012Validator(schema)


# ---------------------------------------------------------------------------------------------
# JSON
# ---------------------------------------------------------------------------------------------


def test_json_document_validates(report) -> None:
    doc = json.loads(json.dumps(verdict_document(report)))
    _validator().validate(doc)
    assert doc["schema"] == VERDICT_SCHEMA_ID
    assert doc["overall"] == "inconclusive" and doc["exit_code"] == 3
    by_id = {c["id"]: c for c in doc["channels"]}
    assert by_id["gyro.x"]["overall"] == "pass"
    z = {t["term"]: t for t in by_id["gyro.z"]["terms"]}
    assert z["bias_instability"]["verdict"] == "inconclusive"
    assert z["bias_instability"]["required_duration"] > 600.0
    assert z["angle_random_walk"]["required_duration"] is None
    # the DESIGN §10 keys of every term
    for t in z.values():
        assert {"term", "limit", "estimate", "low", "high", "verdict", "required_duration"} <= set(
            t
        )
    assert by_id["gyro.x"]["not_verified"][0]["term"] == "bias_repeatability"
    assert doc["caution"] == SAFETY_CAUTION


def test_json_schema_rejects_bad_documents(report) -> None:
    validator = _validator()
    doc = json.loads(json.dumps(verdict_document(report)))
    for mutate in (
        lambda d: d.update(overall="maybe"),
        lambda d: d["channels"][0]["terms"][0].update(verdict="ok"),
        lambda d: d["channels"][0]["terms"][0].pop("required_duration"),
        lambda d: d.update(schema="sensormodel/verdict-report/2"),
        lambda d: d.update(extra=1),
    ):
        bad = copy.deepcopy(doc)
        mutate(bad)
        assert not validator.is_valid(bad)


def test_write_json_and_no_overwrite(report, tmp_path) -> None:
    from sensormodel._io import OutputExistsError

    out = tmp_path / "v.json"
    write_verdict_json(report, out)
    _validator().validate(json.loads(out.read_text(encoding="utf-8")))
    with pytest.raises(OutputExistsError):
        write_verdict_json(report, out)
    write_verdict_json(report, out, force=True)


def test_display_values_in_datasheet_units(report) -> None:
    t = report.channels[0].terms[0]
    label, (lim,) = display_values(t.spec, t.spec.limit)
    assert label == "deg/rt-hr" and lim == pytest.approx(0.02, rel=1e-9)


def test_format_duration() -> None:
    # under a second the value is kept (a drift table's first row at a horizon under 10 s)
    assert format_duration(0.2) == "0.2 s"
    assert format_duration(0.025) == "25 ms"
    assert format_duration(4e-5) == "40 µs"
    assert format_duration(0.0) == "0 s"
    assert format_duration(float("inf")) == "unbounded"
    assert format_duration(45.0) == "45 s"
    assert format_duration(900.0) == "15 min"
    assert format_duration(3 * 3600.0) == "3 h"
    assert format_duration(10 * 86400.0) == "10 d"
    assert format_duration(None) == "none decides it"


def test_text_summary(report) -> None:
    text = verdict_text(report)
    assert "overall: inconclusive" in text
    assert "needs a record of" in text
    assert "not verifiable from a single run" in text
    assert "90 % two-sided" in text


# ---------------------------------------------------------------------------------------------
# HTML
# ---------------------------------------------------------------------------------------------


class _Collector(HTMLParser):
    def __init__(self) -> None:
        super().__init__(convert_charrefs=True)
        self.tags: list[tuple[str, dict[str, str | None]]] = []
        self.text: list[str] = []
        self.stack: list[str] = []
        self.errors: list[str] = []

    def handle_starttag(self, tag, attrs):
        self.tags.append((tag, dict(attrs)))
        if tag not in ("meta", "img", "br", "link"):
            self.stack.append(tag)

    def handle_endtag(self, tag):
        if not self.stack or self.stack[-1] != tag:
            self.errors.append(f"unbalanced </{tag}> (open: {self.stack[-3:]})")
        else:
            self.stack.pop()

    def handle_data(self, data):
        self.text.append(data)


def _parse(page: str) -> _Collector:
    p = _Collector()
    p.feed(page)
    p.close()
    return p


def test_html_parses_and_embeds_every_figure(report) -> None:
    figs = {
        ch.id: [("allan", b"\x89PNG\r\n\x1a\nA"), ("psd", b"\x89PNG\r\n\x1a\nB")]
        for ch in report.channels
    }
    page = verdict_html(report, figs)
    p = _parse(page)
    assert not p.errors and not p.stack
    imgs = [a for t, a in p.tags if t == "img"]
    assert len(imgs) == 4
    for a in imgs:
        assert a["src"].startswith("data:image/png;base64,")
        assert base64.b64decode(a["src"].split(",", 1)[1]).startswith(PNG_MAGIC)


def test_html_escapes_user_text(report) -> None:
    page = verdict_html(report, {})
    p = _parse(page)
    tags = {t for t, _ in p.tags}
    # nothing executable and nothing fetched: no script, no link/iframe, no external URL
    assert "script" not in tags and "iframe" not in tags and "link" not in tags
    assert "<script" not in page.lower()
    assert "onerror" not in "".join(str(a) for _, a in p.tags)
    for _, attrs in p.tags:
        for v in attrs.values():
            assert not (v or "").startswith(("http:", "https:", "//"))
    text = "".join(p.text)
    # the hostile texts arrive as text, intact
    assert HOSTILE in text
    assert "<img src=x onerror=alert(1)>" in text
    assert "a note with <tags> & ampersands" in text
    assert html.escape(HOSTILE) in page
    assert SAFETY_CAUTION in text
    assert "Conventions" in text and "one-sided" in text


def test_html5lib_if_installed(report) -> None:
    html5lib = pytest.importorskip("html5lib")
    parser = html5lib.HTMLParser(strict=True)
    parser.parse(verdict_html(report, {}))


def test_write_html_with_pngs(report, tmp_path: pathlib.Path) -> None:
    out = tmp_path / "rep.html"
    written = write_verdict_html(report, out)
    assert written[0] == str(out)
    pngs = [pathlib.Path(w) for w in written[1:]]
    # one Allan and one PSD figure per channel
    assert sorted(p.name for p in pngs) == sorted(
        f"rep-{c}-{k}.png" for c in ("gyro.x", "gyro.z") for k in ("allan", "psd")
    )
    for png in pngs:
        assert png.read_bytes().startswith(PNG_MAGIC)
    page = out.read_text(encoding="utf-8")
    p = _parse(page)
    embedded = [base64.b64decode(a["src"].split(",", 1)[1]) for t, a in p.tags if t == "img"]
    assert sorted(embedded) == sorted(png.read_bytes() for png in pngs)
    from sensormodel._io import OutputExistsError

    with pytest.raises(OutputExistsError):
        write_verdict_html(report, out)


def test_reason_codes_become_the_sentences_of_the_reports():
    # Every reason code the acceptance results carry has one sentence template; two pinned.
    from sensormodel.report import REASONS, reason_text

    values = {
        "against": "max",
        "column": "typ",
        "text": "0.5 deg/h",
        "side": "above",
        "p_value": 0.1234,
        "alpha": 0.05,
        "n_records": 59,
        "skip_margin": 2.0,
        "channels": ("gyro.x", "gyro.y"),
        "terms": ("gyro.y angle_random_walk", "gyro.y bias_instability"),
        "channel": "gyro.z",
        "segments": 3,
        "duration": 1234.5678,
        "recording_duration": 4000.0,
        "term": "gauss_markov",
        "parameter": "time_constant",
        "edge": "upper",
        "value": 300.0,
        "low": 0.125,
        "high": 300.0,
        "bound": 300.0,
        "resolvable": 300.0,
        "tau": 567.8,
        "sigma": 2.0e-4,
        "unit": "m/s^2",
        "shortest_tau": 0.5,
        "masked_by": "white",
        "share": 0.24,
        "min_share": 0.1,
        "departure": 0.62,
        "bandwidth": 24.7,
        "order": 2,
        "sampling": "point",
        "origin": "detected",
        "step": 8.7e-4,
        "density": 2.5e-5,
        "coefficient": 2.5e-4,
        "ratio": 2.9,
        # the record-quality codes (sensormodel.quality)
        "statistic": 7.5,
        "threshold": 3.66,
        "window": 60.0,
        "time_constant": 300.0,
        "criterion": 1.0,
        "settling_time": 690.8,
        "seconds": 690.85,
        "samples": 13817,
        "sensitivity": 9.7e-8,
        "confidence": 0.9,
        "temperature_low": 25.0,
        "temperature_high": 30.0,
        "windows": 100,
        "limit": 4.8e-7,
        "count": 2,
        "indices": (50000, 123457),
        "times": (500.0, 1234.57),
        "largest": 50.2,
        "fraction": 0.925,
        "used": 133219,
        "total": 144000,
    }
    for code in REASONS:
        text = reason_text(code, values)
        assert text and "{" not in text and "}" not in text, code
    assert reason_text("no_limit_column", values) == (
        "the datasheet gives no max value (only typ 0.5 deg/h); nothing to verify against"
    )
    assert reason_text("limit_test_not_confirmed", values) == (
        "the interval lies above the limit, but the bootstrap test at the limit does not "
        "confirm it (p = 0.123 > 0.05, 59 records): interval widened to the limit"
    )
    assert reason_text("channels_missing", values).endswith("not verified: gyro.x, gyro.y")
    assert reason_text("fit_range_short_tau_departs_model", values).startswith(
        "fitted over τ 0.125 s to 300 s: at shorter τ the record departs from the terms (by up "
        "to 62% of the Allan variance"
    )
    assert reason_text("segments_left_out", values) == (
        "gyro.z: the recording has 3 clean segments; the longest (1234.57 s of 4000 s) was analysed"
    )
    # the same code as a channel analysis carries it (pipeline numbers are floats)
    assert reason_text("segments_left_out", {"count": 2.0, "samples": 1500.0}) == (
        "2 shorter clean segments (1500 samples) left out; the longest is analysed"
    )
    assert reason_text("segments_left_out", {"count": 1, "samples": 10}).startswith(
        "1 shorter clean segment (10 samples)"
    )
    with pytest.raises(KeyError):
        reason_text("an_unknown_code")


def test_channel_display_readable_units_and_stored_units_otherwise():
    from sensormodel.quantities import convert_from_si
    from sensormodel.report import channel_display

    label, factor = channel_display("angular_rate", "rad/s")
    assert label == "°/h" and factor == pytest.approx(convert_from_si(1.0, "angular_rate", "deg/h"))
    label, factor = channel_display("acceleration", "m/s^2")
    assert label == "µg" and factor == pytest.approx(1.0 / 9.80665e-6, rel=1e-12)
    # a channel of another quantity keeps its stored unit
    assert channel_display("angle", "rad") == ("rad", 1.0)
    assert channel_display(None, "V") == ("V", 1.0)
    assert channel_display(None) == ("", 1.0)


def test_drift_table_first_row_under_a_second():
    from sensormodel.drift import channel_drift, table_times
    from sensormodel.model import Channel
    from sensormodel.report import DRIFT_DISPLAY, drift_table
    from sensormodel.terms import White

    gyro = Channel(
        id="gyro.x",
        quantity="angular_rate",
        unit="rad/s",
        sample_rate=100.0,
        terms=(White(3e-6),),
    )
    times = table_times(0.5)  # a horizon under a second: the table starts at horizon/10
    text = drift_table(channel_drift(gyro, 0.5, times=times), times, DRIFT_DISPLAY)
    rows = text.splitlines()[2:]
    assert [r.split("  ")[1].strip() for r in rows] == ["50 ms", "0.5 s"]


def _gauss_markov_identification(high: float, reasons=()):
    from sensormodel.identify import FittedTerm, Identification

    gm = FittedTerm(
        term="gauss_markov",
        parameter="sigma",
        estimate=2.0e-4,
        low=1.5e-4,
        high=2.6e-4,
        confidence=0.9,
        supported=True,
        details={"time_constant": 300.0, "time_constant_low": 180.0, "time_constant_high": high},
        reasons=reasons,
    )
    return Identification(
        channel="accelerometer.x",
        unit="m/s^2",
        sample_rate=2.0,
        n_samples=21_600,
        confidence=0.9,
        terms=(gm,),
        slope_readings={},
    )


def test_identify_table_shows_the_time_constant_and_its_interval():
    rows = identify_rows(_gauss_markov_identification(720.0))
    assert [r[0] for r in rows] == ["gauss_markov", "  time constant T"]
    t_row = rows[1]
    assert t_row[1] == "300 s" and t_row[2] == "5 min"
    assert t_row[3] == "[180, 720] s" and t_row[4] == "[3 min, 12 min]"
    assert t_row[7] == ""
    assert "time constant T" in identify_table(_gauss_markov_identification(720.0))


def test_identify_notes_say_an_unresolved_time_constant():
    reasons = (
        (
            "estimate_at_search_edge",
            {
                "term": "gauss_markov",
                "parameter": "time_constant",
                "edge": "upper",
                "value": 300.0,
                "low": 0.125,
                "high": 300.0,
            },
        ),
        (
            "time_constant_not_resolved",
            {"bound": 300.0, "resolvable": 300.0, "tau": 567.8, "sigma": 2.0e-4, "unit": "m/s^2"},
        ),
    )
    ident = _gauss_markov_identification(float("inf"), reasons)
    t_row = identify_rows(ident)[1]
    assert t_row[3] == "≥ 180 s" and t_row[4] == "≥ 3 min" and t_row[7] == "not resolved"
    notes = identify_notes(ident)
    assert notes[0] == (
        "gauss_markov: the time_constant estimate 300 is at the upper end of its search range "
        "(0.125 to 300, SI)"
    )
    assert notes[1].startswith("gauss_markov: time constant not resolved (T ≥ 300 s)")
    assert "σ ≥ 0.0002 m/s^2" in notes[1]
    # an unsupported term's σ is no bound
    unsupported = dict(reasons[1][1], sigma=0.0)
    text = reason_text("time_constant_not_resolved", unsupported)
    assert "σ ≥" not in text and text.endswith("not told from zero")
    lower = reason_text("time_constant_at_lower_edge", {"bound": 0.2, "shortest_tau": 0.5})
    assert lower.startswith("gauss_markov: time constant at the short end") and "T ≤ 0.2 s" in lower


def test_counts_take_the_right_number():
    # "1 states", "1 channels" were printed: a count agrees with its noun.
    from sensormodel.report import counted

    assert counted(1, "state") == "1 state" and counted(0, "state") == "0 states"
    assert counted(2, "channel") == "2 channels"


def test_figures_mark_the_datasheet_and_show_the_amplitude_density(report) -> None:
    # The datasheet's own readings on the Allan figure (ARW at τ = 1 s, σ(1 s) = N; the
    # bias-instability floor), and the spectrum as datasheets print it: √ of the two-sided
    # PSD, where white noise of IEEE Std 952 density N reads N (Annex C).
    from sensormodel.plots import verdict_allan_figure, verdict_psd_figure

    ch = report.channels[0]
    white = next(t.spec for t in ch.terms if t.spec.type == "white")
    floor = next(t.spec for t in ch.terms if t.spec.quantity == "allan_floor")
    ax = verdict_allan_figure(ch).axes[0]
    marks = {ln.get_label(): ln for ln in ax.lines}
    arw = next(ln for label, ln in marks.items() if label.startswith(f"{white.key} ("))
    assert list(arw.get_xdata()) == [1.0] and arw.get_ydata()[0] == pytest.approx(white.limit)
    line = next(ln for label, ln in marks.items() if label.startswith(f"{floor.key} ("))
    assert line.get_ydata()[0] == pytest.approx(floor.limit)
    psd_ax = verdict_psd_figure(ch).axes[0]
    asd_ax = verdict_psd_figure(ch, asd=True).axes[0]
    assert "√" in asd_ax.get_ylabel() and "²" in psd_ax.get_ylabel()
    measured_psd = next(ln for ln in psd_ax.lines if ln.get_label() == "measured (Welch)")
    measured_asd = next(ln for ln in asd_ax.lines if ln.get_label() == "measured (Welch)")
    np.testing.assert_allclose(
        measured_asd.get_ydata(), np.sqrt(0.5 * measured_psd.get_ydata()), rtol=1e-12
    )
    # the record is white noise of density 0.5·N_lim: its amplitude density reads that (the
    # median over the log bins; each bin averages many Welch segments, whose relative standard
    # error in ASD is below 1/(2√K) ≈ 5 % for K ≥ 25 periodogram values: 15 % is > 3 σ)
    level = np.median(measured_asd.get_ydata())
    assert level == pytest.approx(0.5 * white.limit, rel=0.15)


def test_identify_notes_say_what_the_record_is():
    """The record's reason codes (output filter, sampling, count step) become notes, after the
    fitted range and before the slope-reading notes."""
    import dataclasses

    base = _gauss_markov_identification(720.0)
    record = (
        ("output_filter_fitted", {"bandwidth": 24.7, "order": 2}),
        ("sampling_detected", {"sampling": "point", "origin": "detected"}),
        (
            "count_step_white_floor",
            {"step": 8.7e-4, "unit": "rad/s", "density": 2.5e-5, "share": 0.0017},
        ),
        ("count_step_coarse", {"step": 0.02, "sigma": 0.007, "unit": "rad/s", "ratio": 2.9}),
    )
    ident = dataclasses.replace(base, record_reasons=record)
    notes = identify_notes(ident)
    assert notes[0] == (
        "the short-τ curve lies below white noise: an output filter was fitted, 2-pole "
        "Butterworth at 24.7 Hz (no bandwidth was given)"
    )
    assert notes[1] == (
        "the samples are point samples of the filtered output (told from the short-τ curve)"
    )
    assert notes[2].startswith("integer-coded record, count step 0.00087 rad/s")
    assert "(0.2% of the fitted white variance), reported and not subtracted" in notes[2]
    assert "2.9 times the sample-to-sample noise" in notes[3]
    assumed = reason_text("sampling_assumed", {"sampling": "average", "origin": "default"})
    assert assumed.startswith("the samples are taken as means over the sample period")
    assert reason_text("output_filter_not_resolved", {}).endswith("left out of the fit")
    q = reason_text(
        "count_step_quantization", {"step": 1e-5, "unit": "rad", "coefficient": 2.9e-6}
    )
    assert "Q = step/√12 = 2.9e-06" in q


def test_identify_table_typesets_si_units():
    # the identify table printed rad/s**0.5 (pint's syntax) for a white density: rad/√s
    from sensormodel.identify import FittedTerm, Identification

    white = FittedTerm(term="white", parameter="density", estimate=3.5e-6, low=3.4e-6,
                       high=3.6e-6, confidence=0.9, supported=True)
    ident = Identification(channel="gyro.x", unit="rad/s", sample_rate=100.0, n_samples=360_000,
                           confidence=0.9, terms=(white,), slope_readings={})
    (row,) = identify_rows(ident)
    assert row[1] == "3.5e-06 rad/√s" and "**" not in identify_table(ident)
