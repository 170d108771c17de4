"""The bundled demonstration: the whole chain on the invented BW-T900 / Tern-4 scenario.

Brackwater Instruments (fictional) delivers a BW-T900 tactical IMU for the survey boat Tern-4
(fictional). The receiving inspection records the unit at rest and asks whether it meets its
datasheet. The demo stages that inspection end to end:

1. build the noise model of the example datasheet (``examples/bw-t900.toml``, typical values);
2. make the "delivered" unit: the same model, but with the gyro.z bias instability at twice its
   datasheet maximum (:data:`DEVIATION`);
3. simulate a static record of it (:data:`DEMO_DURATION` at the datasheet's own output rate,
   :data:`DEMO_RATE`, seeded);
4. read the record back and analyse it: overlapping Allan deviation and identified terms;
5. verify it against the datasheet's max values, and plan the record length the datasheet
   needs;
6. write the JSON verdict report and the self-contained HTML report with its figures.

The record is 3 h at the full 400 Hz, as a receiving inspection records it; the demo still
finishes in under a minute on two cores because the statistics of the verdict do not grow with
the record's length. Terms that need a longer record to decide are reported inconclusive with
the length that would decide them.
"""

from __future__ import annotations

import os
import pathlib
import time
from collections.abc import Callable
from dataclasses import dataclass, field, replace
from typing import Any

from ._io import atomic_writer, check_writable, write_json
from .acceptance import plan as make_plan
from .acceptance import spec_limits, verify
from .allan import SCHEMA_FILE, curves_to_json
from .convert import build_model
from .datasheet import Datasheet, load_datasheet
from .errors import AnalysisError, SensorModelError
from .model import NoiseModel
from .quantities import convert_from_si, split_value
from .recording import read_recording
from .report import plan_text, verdict_text, write_verdict_html, write_verdict_json
from .simulate import write_record
from .terms import FLICKER_FLOOR_FACTOR

__all__ = [
    "DEMO_DATASHEET",
    "DEMO_RATE",
    "DEMO_DURATION",
    "DEMO_SEED",
    "DEMO_BOOTSTRAP",
    "DEVIATION",
    "DemoResult",
    "example_path",
    "delivered_model",
    "run_demo",
]

#: The example datasheet the demo starts from.
DEMO_DATASHEET = "bw-t900.toml"
#: Sample rate of the demo record [Hz]: the example datasheet's own output data rate
#: (``sample_rate = "400 Hz"``; ``run_demo`` takes it from the model and checks it).
DEMO_RATE = 400.0
#: Length of the demo record [s] (3 h).
DEMO_DURATION = 3 * 3600.0
#: Seed of the demo record (the demo is reproducible).
DEMO_SEED = 20260
#: Bootstrap records of the identification in the demo (fewer than the default 200, for speed).
DEMO_BOOTSTRAP = 80
#: How the delivered unit deviates: channel, term type, factor on its datasheet max.
DEVIATION = {"channel": "gyro.z", "term": "flicker", "factor_of_max": 2.0}


@dataclass(frozen=True)
class DemoResult:
    """What :func:`run_demo` did.

    Attributes
    ----------
    out : pathlib.Path
        The output folder.
    files : dict of str to str
        What -> file written.
    report : VerdictReport
        The acceptance of the delivered unit.
    plan : Plan
        The recording-length plan of the datasheet.
    staged : str
        The deviation built into the delivered unit, in words.
    timings : dict of str to float
        Seconds per step.
    """

    out: pathlib.Path
    files: dict[str, str]
    report: Any
    plan: Any
    staged: str
    timings: dict[str, float] = field(default_factory=dict)


def example_path(name: str) -> pathlib.Path:
    """The bundled example file ``name`` (``examples/`` beside the package, or in it)."""
    here = pathlib.Path(__file__).resolve().parent
    for base in (here / "examples", here.parent / "examples"):
        p = base / name
        if p.is_file():
            return p
    raise AnalysisError(
        f"the bundled example '{name}' is not installed",
        "a source checkout or an installation with the examples folder",
    )


def delivered_model(model: NoiseModel, datasheet: Datasheet) -> tuple[NoiseModel, str]:
    """The staged delivered unit: ``model`` with the :data:`DEVIATION` applied.

    The gyro.z flicker term gets the coefficient whose Allan floor is ``factor_of_max`` times
    the datasheet's max bias instability.

    Returns
    -------
    (NoiseModel, str)
        The model and a sentence describing the deviation.
    """
    cid, kind, factor = DEVIATION["channel"], DEVIATION["term"], DEVIATION["factor_of_max"]
    ax = next(a for a in datasheet.channels() if a.channel_id == cid)
    limits, _ = spec_limits(ax)
    spec = next(s for s in limits if s.type == kind)
    ch = model.channel(cid)
    floor = factor * spec.limit
    terms = tuple(
        replace(t, coefficient=floor / FLICKER_FLOOR_FACTOR) if t.type == kind else t
        for t in ch.terms
    )
    unit = split_value(spec.text)[1]
    shown = convert_from_si(floor, spec.kind, unit)
    text = (
        f"{cid} bias instability (Allan floor) {shown:.3g} {unit}, {factor:g} × the datasheet "
        f"max of {spec.text}; every other term at its typical value"
    )
    return model.with_channel(replace(ch, terms=terms)), text


def _timed(timings: dict[str, float], name: str, t0: float) -> float:
    t1 = time.perf_counter()
    timings[name] = t1 - t0
    return t1


def run_demo(
    out: str | os.PathLike[str],
    *,
    force: bool = False,
    duration: float = DEMO_DURATION,
    rate: float | None = None,
    seed: int = DEMO_SEED,
    progress: Callable[[str], None] | None = None,
) -> DemoResult:
    """Run the whole chain on the bundled example and write every result into ``out``.

    Parameters
    ----------
    out : path-like
        Output folder (created if missing; existing files are not overwritten without
        ``force``).
    force : bool
        Overwrite files of an earlier run.
    duration : float
        Length of the simulated record [s].
    rate : float, optional
        Its sample rate [Hz]; default the datasheet's output data rate (:data:`DEMO_RATE`).
    seed : int
        Seed of the simulation.
    progress : callable, optional
        Called with a short text before each step.

    Returns
    -------
    DemoResult
    """

    def say(text: str) -> None:
        if progress is not None:
            progress(text)

    if not (duration > 0 and (rate is None or rate > 0)):
        raise AnalysisError(f"duration {duration!r} s, rate {rate!r} Hz", "positive numbers")
    folder = pathlib.Path(out)
    files = _output_files(folder, force=force)

    timings: dict[str, float] = {}
    t0 = time.perf_counter()
    say(f"building the model of {DEMO_DATASHEET}")
    ds, delivered, staged = _build(files, force=force)
    t0 = _timed(timings, "build", t0)

    if rate is None:
        rate = _model_rate(delivered)
    n = int(round(duration * rate))
    say(f"simulating the delivered unit: {n} samples per channel at {rate:g} Hz")
    write_record(files["recording"], delivered, n, rate, seed=seed, force=force, time_column=False)
    t0 = _timed(timings, "simulate", t0)

    say("analysing and verifying the record against the datasheet")
    rec = read_recording(files["recording"])
    report = verify(rec, ds, seed=seed, n_boot=DEMO_BOOTSTRAP, workers=2)
    t0 = _timed(timings, "analyse+verify", t0)

    say("writing the reports")
    _write_analysis(report, files, force=force)
    intro = _intro(report, rec.duration / 3600.0, rate, staged)
    report = report.with_notes(f"staged deviation (demo): {staged}")
    write_verdict_json(report, files["verdict report (JSON)"], force=force)
    pl = make_plan(ds)
    _write_text(files["plan"], plan_text(pl) + "\n", force=force)
    _write_text(files["summary"], verdict_text(report) + "\n", force=force)
    written = write_verdict_html(
        report,
        files["report (HTML)"],
        force=force,
        title="Acceptance report: BW-T900 for Tern-4 (demo)",
        intro=intro,
    )
    _timed(timings, "report", t0)
    out_files = {k: str(v) for k, v in files.items()}
    out_files["figures (PNG)"] = ", ".join(pathlib.Path(w).name for w in written[1:])
    return DemoResult(folder, out_files, report, pl, staged, timings)


def _model_rate(model: NoiseModel) -> float:
    """The output data rate of the model's channels [Hz] (one rate for the whole unit)."""
    rates = {float(ch.sample_rate) for ch in model.channels}
    if len(rates) != 1:
        raise AnalysisError(
            f"the example's channels have the rates {sorted(rates)} Hz", "one output data rate"
        )
    return rates.pop()


def _output_files(folder: pathlib.Path, *, force: bool) -> dict[str, pathlib.Path]:
    """The demo's output files in ``folder`` (created), each checked writable."""
    if folder.exists() and not folder.is_dir():
        raise AnalysisError("is a file", "a folder for the demo's output", source=str(folder))
    folder.mkdir(parents=True, exist_ok=True)
    files = {
        "datasheet (copy of the bundled example)": folder / DEMO_DATASHEET,
        "datasheet model": folder / "bw-t900-model.json",
        "delivered unit (truth)": folder / "delivered-unit-model.json",
        "recording": folder / "delivered-unit.npy",
        "Allan deviation": folder / "allan.json",
        "identified model": folder / "identified-model.json",
        "verdict report (JSON)": folder / "verdict.json",
        "plan": folder / "plan.txt",
        "summary": folder / "verdict.txt",
        "report (HTML)": folder / "report.html",
    }
    for p in files.values():
        check_writable(p, force=force)
    check_writable(files["recording"].with_name(files["recording"].name + ".json"), force=force)
    return files


def _build(
    files: dict[str, pathlib.Path], *, force: bool
) -> tuple[Datasheet, NoiseModel, str]:
    """Copy the example datasheet, build and write its model and the staged delivered unit's.

    Returns the datasheet, the delivered unit's model and the staged deviation in words."""
    sheet = files["datasheet (copy of the bundled example)"]
    with atomic_writer(sheet, force=force, binary=True) as fh:
        fh.write(example_path(DEMO_DATASHEET).read_bytes())
    ds = load_datasheet(sheet)
    model = build_model(ds)
    model.save(files["datasheet model"], force=force)
    delivered, staged = delivered_model(model, ds)
    delivered = replace(
        delivered,
        provenance={
            **delivered.provenance,
            "notes": [*delivered.provenance.get("notes", []), f"demo: staged deviation: {staged}"],
        },
    )
    delivered.save(files["delivered unit (truth)"], force=force)
    return ds, delivered, staged


def _intro(report: Any, hours: float, rate: float, staged: str) -> list[str]:
    """The HTML report's opening paragraphs: the scenario, the staging, and why terms are
    undecided (the demo record is too short for some terms)."""
    undecided = [t for ch in report.channels for t in ch.terms if t.verdict == "inconclusive"]
    intro = [
        "Receiving inspection, survey boat Tern-4 (fictional): is the delivered Brackwater "
        "Instruments BW-T900 (fictional) inside its datasheet? The unit was recorded at rest "
        f"for {hours:.3g} h at {rate:g} Hz and the record is compared with the datasheet's "
        "max values.",
        f"This is the bundled demonstration: the record is simulated, and the unit was staged "
        f"with one deviation: {staged}.",
    ]
    if undecided:
        intro.append(
            f"The demo record ({hours:.3g} h) is too short to decide {len(undecided)} "
            "term(s): they are inconclusive. The table gives "
            "the record length that would decide each."
        )
    return intro


def _write_text(path: pathlib.Path, text: str, *, force: bool) -> None:
    with atomic_writer(path, force=force) as fh:
        fh.write(text)


def _write_analysis(report: Any, files: dict[str, pathlib.Path], *, force: bool) -> None:
    """Write the measured Allan curves and the identified model of every channel."""
    curves = [ch.allan for ch in report.channels]
    write_json(files["Allan deviation"], curves_to_json(curves), force=force, schema=SCHEMA_FILE)
    try:
        channels = tuple(ch.identification.to_channel() for ch in report.channels)
        channels = tuple(
            replace(c, id=ch.id) if c.id != ch.id else c
            for c, ch in zip(channels, report.channels, strict=True)
        )
        identified = NoiseModel(
            sensor={"name": "BW-T900 (delivered unit, identified)"},
            channels=channels,
            provenance={"from": "recording", "recording": files["recording"].name},
        )
        identified.save(files["identified model"], force=force)
    except (AttributeError, SensorModelError):
        files.pop("identified model")
