"""Measure a real tube: sweep, resonances, fit and calibration.

  showkit measure sweep --out sweep.wav        write an exponential sine sweep (level kept safe)
  showkit measure analyse REC.wav --sweep sweep.wav [--update-rig]
                                               find the modes and Q, fit the model, show the fit
  showkit measure live --sweep sweep.wav       play and record at once through the audio device
  showkit measure level --pressure "5.8 Pa"    write the calibration point into [drive]

The sweep level is bounded so that the sweep itself keeps every hole above the
reserve: steady-state pressure at each hole and frequency from the rig's
calibration and model.  Levels are model estimates: start low.
"""

from __future__ import annotations

import argparse
import sys
from pathlib import Path

# the work itself lives in the analysis and show layers (imported where used: they bring numpy,
# and every command module is imported for `showkit --help`); this module parses, plays and prints
from showkit.cli.common import (add_conditions_options, add_json_option, add_rig_option, add_temperature_option,
                                conditions_from_args, frequency_option, level_caution,
                                load_rig_from_args, print_json, table)
from showkit.errors import InputError, MeasureError, RigError
from showkit.printable import printable
from showkit.show.playrec import play_record

#: where each [drive] reference value of `measure level` comes from, for the errors
LEVEL_WHERE = {"reference_frequency": "--frequency", "reference_level": "--level",
               "reference_pressure": "--pressure"}


def add_arguments(parser: argparse.ArgumentParser) -> None:
    sub = parser.add_subparsers(dest="measure_command", metavar="STEP")
    p = sub.add_parser("sweep", help="write an exponential sine sweep WAV")
    add_rig_option(p)
    add_conditions_options(p)
    add_temperature_option(p)
    p.add_argument("--out", required=True, metavar="SWEEP.wav", help="file to write")
    _sweep_options(p)
    p.add_argument("--level", type=float, metavar="DBFS",
                   help="peak level, dBFS (default: 6 dB below the safe bound, not below -80); never above the bound")
    p = sub.add_parser("analyse", help="analyse a recording of the sweep",
                       description="Measure the tube's modes from a recording of the sweep at the cap and fit "
                                   "the model to them (sound speed, hole end correction, hole losses); with "
                                   "--update-rig, write the fit into the rig file (a backup is kept).")
    p.add_argument("recording", metavar="REC.wav")
    p.add_argument("--sweep", required=True, metavar="SWEEP.wav", help="the sweep that was played")
    _analyse_options(p)
    p = sub.add_parser("live", help="play the sweep and record at the cap, then analyse")
    p.add_argument("--sweep", required=True, metavar="SWEEP.wav")
    p.add_argument("--save", metavar="REC.wav", help="also save the recording")
    p.add_argument("--device", help="audio device (number or name; see showkit devices)")
    _analyse_options(p)
    add_conditions_options(p)
    p = sub.add_parser("level", help="the absolute calibration point ([drive] reference_*)")
    add_rig_option(p)
    p.add_argument("--frequency", metavar="FREQ",
                   help="reference sine frequency, e.g. 1400 or \"1.4 kHz\" (default: the rig's if the tube's losses cannot move the "
                        "reading there, else one showkit picks between modes); a frequency where they can is refused")
    p.add_argument("--level", type=float, metavar="DBFS", help="reference sine peak level (default: the rig's)")
    p.add_argument("--out", metavar="SINE.wav", help="write the reference sine to play with any player")
    p.add_argument("--pressure", metavar="PRESSURE",
                   help='pressure amplitude (zero to peak) read at the cap, e.g. "5.8 Pa"')
    p.add_argument("--recording", metavar="REC.wav", help="microphone recording of the reference sine at the cap")
    p.add_argument("--calibrator", metavar="CAL.wav",
                   help="the same microphone and gain recording a 94 dB SPL (1 Pa rms) 1 kHz calibrator")
    p.add_argument("--play", action="store_true",
                   help="play the reference sine (10 s) through the audio device; with --calibrator, "
                        "record the cap microphone at the same time and take the pressure from it")
    p.add_argument("--device", help="audio device for --play (number or name; see showkit devices)")
    add_conditions_options(p)  # the sine's own check is made for today's manometer reading
    p.add_argument("--temperature", metavar="TEMP",
                   help='the gas temperature in the tube as the pressure is read, e.g. "21 C" (needed with '
                        "--update-rig: it is written with the reading; default otherwise: the rig file's)")
    p.add_argument("--update-rig", action="store_true",
                   help="write the calibration, with the gas temperature of the reading, into the rig file")
    add_json_option(p)


def _sweep_options(p) -> None:
    p.add_argument("--start", default=20.0, metavar="FREQ", help='start frequency, e.g. 20 or "20 Hz" (default 20 Hz)')
    p.add_argument("--stop", default=2000.0, metavar="FREQ", help='stop frequency, e.g. 2000 or "2 kHz" (default 2000 Hz)')
    p.add_argument("--length", type=float, default=10.0, metavar="S", help="sweep length (default 10 s)")
    p.add_argument("--rate", type=int, default=48000, metavar="HZ", help="sample rate (default 48000)")


def _analyse_options(p) -> None:
    add_rig_option(p)
    p.add_argument("--temperature", metavar="TEMP",
                   help='the gas temperature in the tube while the sweep played, e.g. "24 C" (default: the '
                        "rig file's); the fit is made in it, and --update-rig writes it as the gas temperature, "
                        "the calibration reading kept in the gas it was read in")
    p.add_argument("--update-rig", action="store_true",
                   help="write the fitted values, measured modes and drive response into the rig file")
    p.add_argument("--gas-as", choices=["air_fraction", "temperature"], default="air_fraction",
                   help="write the fitted sound speed as the air fraction (default) or an effective temperature")
    p.add_argument("--no-drive-response", action="store_true",
                   help="keep the default speaker model (do not write the measured drive response)")
    p.add_argument("--plot", metavar="FILE.png",
                   help="also draw the measured response with the measured and fitted modes (1000x600 px PNG)")
    add_json_option(p)


def run(args) -> int:
    step = getattr(args, "measure_command", None)
    if step is None:
        print(__doc__.strip())
        return 0
    return {"sweep": _run_sweep, "analyse": _run_analyse, "live": _run_live, "level": _run_level}[step](args)


def _protect(args) -> list:
    """Files a measurement reads, which its outputs must never replace."""
    from showkit.rigfile import demo_rig_path

    out = [(demo_rig_path(), "the bundled demo rig")]
    for name, role in (("rig", "the rig file"), ("sweep", "the sweep"), ("recording", "the recording"),
                       ("calibrator", "the calibrator recording")):
        value = getattr(args, name, None)
        if value:
            out.append((value, role))
    return out


def _out_path(path: str, args, what: str):
    from showkit.safesave import check_target

    return check_target(Path(path), _protect(args), what)


def _run_sweep(args) -> int:
    import numpy as np

    from showkit.analysis.measurement import sweep_bound_db
    from showkit.analysis.sweep import SWEEP_LEVEL_MIN_DBFS, SweepSpec, check_spec, exponential_sweep
    from showkit.safesave import write_audio

    start_hz, stop_hz = frequency_option(args.start, "--start"), frequency_option(args.stop, "--stop")
    rig = load_rig_from_args(args)
    _out_path(args.out, args, "sweep")  # before any work: not a folder, not the rig
    asked = SweepSpec(start_hz, stop_hz, args.length, args.rate, 0.5)  # the level comes from the bound
    check_spec(asked)
    bound_db, f_worst = sweep_bound_db(rig, asked)
    if bound_db < SWEEP_LEVEL_MIN_DBFS:
        raise MeasureError(f"the safe sweep bound {bound_db:.1f} dBFS is below the {SWEEP_LEVEL_MIN_DBFS:g} dBFS "
                           "floor: at this calibration the tube is driven too hard for a sweep worth recording",
                           "--level", "turn the amplifier down, then calibrate again (showkit measure level) "
                           "and write the sweep for the new calibration")
    default_db = max(bound_db - 6.0, SWEEP_LEVEL_MIN_DBFS)
    level_db = default_db if args.level is None else args.level
    if not np.isfinite(level_db):
        raise MeasureError(f"{level_db:g} dBFS is not a level", "--level",
                           f"give a peak level in dBFS, {bound_db:.1f} or lower")
    if level_db > bound_db + 1e-9:
        raise MeasureError(f"--level {level_db:g} dBFS is above the safe sweep bound {bound_db:.1f} dBFS",
                           "--level", f"use {bound_db:.1f} dBFS or lower (the tube peaks near {f_worst:.0f} Hz)")
    if level_db < SWEEP_LEVEL_MIN_DBFS:
        raise MeasureError(f"--level {level_db:g} dBFS is below {SWEEP_LEVEL_MIN_DBFS:g} dBFS: the recording of a "
                           "sweep that quiet would hold only noise", "--level",
                           f"use {default_db:.1f} dBFS or leave --level out")
    spec = SweepSpec(start_hz, stop_hz, args.length, args.rate, 10 ** (level_db / 20))
    x = exponential_sweep(spec)
    write_audio(args.out, x.astype(np.float32), args.rate, "FLOAT", protect=_protect(args), what="sweep")
    print(f"wrote {printable(args.out)}: {start_hz:g}-{stop_hz:g} Hz, {args.length:g} s at {args.rate} Hz, "
          f"peak {level_db:.1f} dBFS")
    print(f"safe bound {bound_db:.1f} dBFS: keeps every hole at least {rig.reserve:.0%} of "
          f"{rig.static_pa:.2f} Pa above ambient in every tube of the loss family, in time and in steady "
          f"state (most sensitive near {f_worst:.0f} Hz), at {rig.temperature_k - 273.15:.1f} C, "
          f"from {rig.describe_drive()}")
    limit_hz = rig.model.plane_wave_limit_hz
    if stop_hz > limit_hz:
        above = 100.0 * np.log(stop_hz / limit_hz) / np.log(stop_hz / start_hz)
        print(f"note: above {limit_hz:.0f} Hz, the tube's plane-wave limit, the model says nothing; the bound "
              f"covers the sweep below it (the sweep spends {above:.0f} % of its time above)")
    level_caution()
    return 0


def _report(rig, report, args) -> None:
    if args.json:
        print_json(report)
        return
    fit = report["fit"]
    rec = report["recording"]
    print(f"recording: sweep found {rec['delay_s']:.3f} s in, impulse-to-noise {rec['snr_db']:.0f} dB, "
          f"band {rec['band_hz'][0]:.0f}-{rec['band_hz'][1]:.0f} Hz")
    rows = []
    for m, before, after, c0, c1 in zip(report["modes"], fit["rig_model_hz"], fit["model_hz"],
                                        fit["before_cents"], fit["residual_cents"]):
        rows.append([f"{m['frequency_hz']:.2f}", f"{m['q']:.1f}", f"{m['level_db']:.1f}",
                     f"{before:.2f}", f"{c0:+.1f}", f"{after:.2f}", f"{c1:+.1f}"])
    print(table(rows, ["measured Hz", "Q", "level dB", "rig model Hz", "cents", "fitted Hz", "cents"],
                ">>>>>>>"))
    print(f"sound speed {fit['sound_speed_m_s']:.2f} m/s (rig: {fit['rig_sound_speed_m_s']:.2f}); "
          + (f"end correction {fit['end_correction']:.3f} hole radii; resistance "
             f"{fit['resistance_pa_s_m3']:.3g} Pa s/m3; " if fit["end_correction"] is not None else "")
          + f"rms residual {fit['rms_cents']:.1f} cents")
    for w in report["warnings"]:
        print(f"warning: {w}")


def _analyse(rig, rec, rec_rate, sweep, sweep_rate, where: str, args) -> dict:
    """The analysis, its report printed, and ``--plot``: the response is measured (the sweep
    deconvolved) once, for the analysis and the plot of it with the modes marked."""
    from showkit.analysis.measurement import analyse_recording
    from showkit.analysis.sweep import measure_response

    resp = measure_response(rec, rec_rate, sweep, sweep_rate, where)
    report = analyse_recording(rig, rec, rec_rate, sweep, sweep_rate, where, response=resp)
    _report(rig, report, args)
    if getattr(args, "plot", None):
        from showkit.export.figures import plot_response, response_level_db

        path = plot_response(resp.freq_hz, response_level_db(resp.response), report, args.plot)
        print(f"wrote {path}", file=sys.stderr)
    return report


def _update(rig, report, args) -> None:
    from showkit.rigwrite import write_fit

    if not getattr(args, "rig", None):
        raise RigError("--update-rig needs your own rig file", "--rig", "copy the demo rig and give --rig FILE")
    backup = write_fit(args.rig, report, drive_response=not args.no_drive_response, prefer_gas=args.gas_as,
                       temperature_k=None if args.temperature is None else rig.temperature_k)
    if not args.json:
        print(f"updated {printable(args.rig)} (previous version kept as {printable(backup)})")
    _calibration_still_good(args.rig)


def _calibration_still_good(path) -> None:
    """After a fit: say so at once if the calibration point is no longer one the tube's losses cannot move."""
    from showkit.rigfile import load_rig

    try:
        load_rig(path)
    except RigError as exc:
        if "reference_frequency" in exc.where:
            print(f"warning: calibrate again before using this rig: {exc.what} -- run showkit measure level "
                  f"--rig {path}", file=sys.stderr)
        else:
            raise


def _run_analyse(args) -> int:
    from showkit.analysis.audio import read_whole

    rig = load_rig_from_args(args)
    rec, rec_rate = read_whole(args.recording, "recording")
    sweep, sweep_rate = read_whole(args.sweep, "sweep")
    report = _analyse(rig, rec, rec_rate, sweep, sweep_rate, args.recording, args)
    if args.update_rig:
        _update(rig, report, args)
    return 0


def _run_live(args) -> int:
    from showkit.analysis.audio import read_whole
    from showkit.analysis.measurement import check_sweep
    from showkit.safesave import write_audio

    # the tube today (--temperature, --static): the sweep is checked in it and the fit made in it
    rig = load_rig_from_args(args)
    if args.save:
        _out_path(args.save, args, "recording")
    sweep, rate = read_whole(args.sweep, "sweep")
    if sweep.ndim != 1:  # the check and the loudspeaker must hear the same one signal
        raise MeasureError(f"the sweep has {sweep.shape[1]} channels", args.sweep,
                           "give the mono sweep `showkit measure sweep` writes")
    # never played above its ceiling in today's tube, whoever made the file
    check_sweep(rig, sweep, int(rate), args.sweep)
    level_caution()
    rec = play_record(sweep, int(rate), device=args.device)
    if args.save:
        write_audio(args.save, rec, int(rate), "FLOAT", protect=_protect(args), what="recording")
    report = _analyse(rig, rec, rate, sweep, rate, "live recording", args)
    if args.update_rig:
        _update(rig, report, args)
    return 0


def _level_drive(rig, args):
    """The new calibration's frequency and level through the one door (the reading comes later)."""
    from showkit.analysis.measurement import reference_frequency
    from showkit.conditions import make_calibration

    freq, note = reference_frequency(rig, frequency_option(args.frequency, "--frequency"))
    if note:
        print(note, file=sys.stderr)
    # the sine's frequency and level are checked before it is made (the sine's own ceiling rests
    # on the rig's present calibration, robust over the loss family: every member calibrated with
    # that reading, so it holds wherever the reading was taken)
    return make_calibration(reference_frequency=freq, reference_level=args.level,
                            base=rig.drive, where=dict(LEVEL_WHERE), tube=rig.model)


def _write_sine(sine, drive, args) -> None:
    """``--out``: the reference sine as a WAV file to play with any player."""
    import numpy as np

    from showkit.analysis.measurement import REFERENCE_RATE_HZ
    from showkit.show.render import write_wav

    _out_path(args.out, args, "reference sine")
    write_wav(args.out, sine.astype(np.float32), REFERENCE_RATE_HZ, protect=_protect(args))
    print(f"wrote {printable(args.out)}: {drive.reference_frequency_hz:g} Hz at {drive.reference_level_dbfs:g} "
          "dBFS peak, 10 s; play it and read the cap pressure")


def _play_sine(sine, drive, headroom, rig, args):
    """``--play``: the sine (already checked below its ceiling on ``rig``: ``headroom`` dB) played
    while the cap microphone records."""
    from showkit.analysis.measurement import REFERENCE_RATE_HZ

    freq, level = drive.reference_frequency_hz, drive.reference_level_dbfs
    print(f"playing {freq:g} Hz at {level:g} dBFS for 10 s ({headroom:.1f} dB below its ceiling for static "
          f"{rig.static_pa:.2f} Pa, reserve {rig.reserve:g}, gas {rig.temperature_k - 273.15:.1f} C; give "
          "--static and --temperature for today's readings)...", file=sys.stderr)
    return play_record(sine, REFERENCE_RATE_HZ, tail_s=0.5, device=args.device)


def _reading(args, played, freq_hz: float):
    """The cap pressure (Pa, zero to peak, or text with a unit) from the options, or None without one."""
    from showkit.analysis.audio import read_whole
    from showkit.analysis.measurement import REFERENCE_RATE_HZ, calibrated_pressure, played_pressure

    if args.pressure is not None:
        return args.pressure
    if played is not None and args.calibrator:
        cal, cal_rate = read_whole(args.calibrator, "calibrator recording")
        return played_pressure(played, cal, REFERENCE_RATE_HZ, cal_rate, freq_hz)
    if args.recording and args.calibrator:
        rec, rate = read_whole(args.recording, "recording")
        cal, cal_rate = read_whole(args.calibrator, "calibrator recording")
        return calibrated_pressure(rec, cal, rate, cal_rate, freq_hz, args.recording)
    if not (args.out or args.play):
        raise InputError("no reading given", "measure level",
                         'give --pressure "5.8 Pa", or --recording and --calibrator, or --out to write '
                         'the sine, or --play to play it')
    return None


def _run_level(args) -> int:
    from showkit.analysis.measurement import (REFERENCE_RATE_HZ, calibration_values, check_reference_sine,
                                              reference_sine)
    from showkit.conditions import make_calibration
    from showkit.rigfile import check_reading_temperature, load_rig

    if args.update_rig and args.temperature is None:  # before anything is played
        raise InputError("--update-rig needs the gas temperature of the reading", "--temperature",
                         'give the gas temperature in the tube now, e.g. --temperature "21 C": the tube\'s answer '
                         "at the calibration frequency moves with it, the loudspeaker's drive does not")
    # the rig's own calibration may be the one being replaced: load it unchecked, check the new frequency;
    # --temperature makes the tube the one the reading is taken in
    file_rig = load_rig(getattr(args, "rig", None), check_calibration=False)
    rig = file_rig.with_conditions(conditions=conditions_from_args(args, file_rig.conditions))
    check_reading_temperature(rig.temperature_k, file_rig.temperature_k, "--temperature")
    drive = _level_drive(rig, args)
    if (args.frequency is None and drive.reference_frequency_hz != rig.drive.reference_frequency_hz
            and not args.play and (args.pressure is not None or args.recording)):
        # the reading is of a sine played before: at the rig's frequency, not the one just picked
        raise MeasureError(f"the reading is of the rig's {rig.drive.reference_frequency_hz:g} Hz sine, and the "
                           "tube's losses move the reading there in this gas", "--frequency",
                           f"play the sine at {drive.reference_frequency_hz:g} Hz (--out or --play) and read it, "
                           f"then give --frequency {drive.reference_frequency_hz:g} with the reading")
    level_caution()
    sine = reference_sine(drive.reference_frequency_hz, drive.reference_level_dbfs)
    headroom = None
    if args.out or args.play:  # refused above its ceiling, whether it is written or played
        headroom = check_reference_sine(rig, sine, REFERENCE_RATE_HZ, drive.reference_level_dbfs)
    if args.out:
        _write_sine(sine, drive, args)
    played = _play_sine(sine, drive, headroom, rig, args) if args.play else None
    reading = _reading(args, played, drive.reference_frequency_hz)
    if reading is None:
        return 0
    # the reading through the same door: finite and within the calibration limits
    where = dict(LEVEL_WHERE)
    if args.pressure is None:
        where["reference_pressure"] = f"{args.recording or 'live recording'}: measured pressure"
    result = calibration_values(make_calibration(reference_pressure=reading, base=drive, where=where,
                                                 tube=rig.model))
    result["reference_temperature_k"] = rig.temperature_k
    _print_calibration(result, args)
    if args.update_rig:
        _update_reference(result, args)
    return 0


def _print_calibration(result: dict, args) -> None:
    if args.json:
        print_json(result)
        return
    print(f"calibration: {result['reference_pressure']:.3g} Pa at the cap (zero to peak; {result['spl_db']:.1f} "
          f"dB SPL) for {result['reference_frequency']:g} Hz at {result['reference_level']:g} dBFS, "
          f"gas at {result['reference_temperature_k'] - 273.15:.1f} C")


def _update_reference(result: dict, args) -> None:
    from showkit.rigwrite import update_rig

    if not args.rig:
        raise RigError("--update-rig needs your own rig file", "--rig", "give --rig FILE")
    backup = update_rig(args.rig, reference=result)
    if not args.json:
        print(f"updated {printable(args.rig)} (previous version kept as {printable(backup)})")
