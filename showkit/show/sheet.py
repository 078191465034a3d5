"""The cue sheet: a presenter's show file (TOML), read, checked and saved safely.

A sheet has ``title``, ``rig`` (path relative to the sheet, or ``"demo"``; required),
``format`` (an integer version) and ``[[cue]]`` tables in show order.  Each cue
has an ``id``, a ``label``, exactly one source (``audio`` with ``start`` and
``end``; ``tone``; ``glide``; ``pause``), a ``gain`` in dB, ``fade_in``,
``fade_out``, ``then`` (``"wait"`` or ``"next"``), ``notes``, optional
``ride``, and the ``[cue.lock]`` table showkit writes.  See the README.

Saving never loses data: the new text goes to a temporary file in the same
folder, is flushed and fsync'd, the previous version is kept as
``NAME.toml.bak``, and the temporary file is renamed over the sheet.
A sheet that does not parse is never overwritten; unknown keys are refused
with a message, never dropped silently.
"""

from __future__ import annotations

import difflib
import math
import re
from dataclasses import dataclass, field, replace
from pathlib import Path

from showkit import units
from showkit.errors import InputError, SheetError
from showkit.limits import MAX_CUES, MAX_GENERATED_S
from showkit.safesave import write_text
from showkit.tomlfile import parse_toml, read_text

#: The sheet format this version reads and writes.
FORMAT_VERSION = 1

DEMO_RIG = "demo"
DEMO_AUDIO_PREFIX = "demo:"

_TOP_KEYS = {"title", "rig", "format", "cue", "notes"}
_CUE_KEYS = {"id", "label", "audio", "start", "end", "tone", "glide", "pause", "gain",
             "fade_in", "fade_out", "then", "notes", "ride", "lock"}
_TONE_KEYS = {"mode", "frequency", "duration"}
_GLIDE_KEYS = {"from_mode", "from_frequency", "to_mode", "to_frequency", "duration"}
_PAUSE_KEYS = {"duration"}
_LOCK_KEYS = {"ceiling_db", "pressure_db", "full_scale_db", "limited_by", "source_hash",
              "rig_hash", "calibration_hash", "static_pa", "reserve", "analysis_version",
              "locked_at", "worst_hole", "worst_time_s", "frequency_hz", "to_frequency_hz"}
THEN_VALUES = ("wait", "next")
SOURCE_KINDS = ("audio", "tone", "glide", "pause")


@dataclass(frozen=True)
class AudioSource:
    """A passage of an audio file: ``path`` as written, ``start_s`` and ``end_s`` (None: the end)."""

    path: str
    start_s: float = 0.0
    end_s: float | None = None
    kind = "audio"


@dataclass(frozen=True)
class ToneSource:
    """A steady sine on a mode (``mode``) or at ``frequency_hz``, for ``duration_s``."""

    duration_s: float
    mode: int | None = None
    frequency_hz: float | None = None
    kind = "tone"


@dataclass(frozen=True)
class GlideSource:
    """A sine gliding exponentially in frequency from one mode/frequency to another."""

    duration_s: float
    from_mode: int | None = None
    from_frequency_hz: float | None = None
    to_mode: int | None = None
    to_frequency_hz: float | None = None
    kind = "glide"


@dataclass(frozen=True)
class PauseSource:
    """Silence for talking, ``duration_s`` long."""

    duration_s: float
    kind = "pause"


Source = AudioSource | ToneSource | GlideSource | PauseSource


@dataclass(frozen=True)
class Lock:
    """What ``showkit lock`` computed for a cue and what it was computed from.

    ``ceiling_db`` is the largest safe gain; ``pressure_db`` and ``full_scale_db``
    the two limits it is the lower of; the hashes, static pressure, reserve and
    analysis version say what it is valid for.
    """

    ceiling_db: float
    pressure_db: float
    full_scale_db: float
    limited_by: str
    source_hash: str
    rig_hash: str
    calibration_hash: str
    static_pa: float
    reserve: float
    analysis_version: int
    locked_at: str = ""
    worst_hole: int = -1
    worst_time_s: float = 0.0
    frequency_hz: float | None = None
    to_frequency_hz: float | None = None


@dataclass(frozen=True)
class Cue:
    """One cue in show order."""

    id: str
    source: Source
    label: str = ""
    gain_db: float = 0.0
    fade_in_s: float = 0.0
    fade_out_s: float = 0.0
    then: str = "wait"
    notes: str = ""
    ride: bool = False
    lock: Lock | None = None

    @property
    def kind(self) -> str:
        return self.source.kind


@dataclass
class Sheet:
    """A cue sheet in memory.  ``rig`` is kept as written (relative to the sheet)."""

    title: str
    rig: str
    cues: list[Cue] = field(default_factory=list)
    format: int = FORMAT_VERSION
    notes: str = ""
    path: Path | None = None
    header: str = ""  # the comment lines at the top of the file, kept when saving

    @property
    def folder(self) -> Path:
        return self.path.parent if self.path else Path.cwd()

    def rig_path(self) -> Path | None:
        """The rig file's path, or ``None`` for the bundled demo rig."""
        if self.rig == DEMO_RIG:
            return None
        p = Path(self.rig).expanduser()
        return p if p.is_absolute() else self.folder / p

    def audio_path(self, source: AudioSource) -> Path:
        """Where an audio source's file is (``demo:NAME`` is a bundled demo track)."""
        if source.path.startswith(DEMO_AUDIO_PREFIX):
            from showkit.demo_files import demo_audio_path

            return demo_audio_path(source.path[len(DEMO_AUDIO_PREFIX):])
        p = Path(source.path).expanduser()
        return p if p.is_absolute() else self.folder / p

    def cue(self, cue_id: str) -> Cue:
        for c in self.cues:
            if c.id == cue_id:
                return c
        raise SheetError(f"no cue {cue_id!r}", str(self.path or "sheet"), "check the cue id")

    def index(self, cue_id: str) -> int:
        return [c.id for c in self.cues].index(cue_id)

    def replace_cue(self, cue_id: str, **changes) -> Cue:
        i = self.index(cue_id)
        self.cues[i] = replace(self.cues[i], **changes)
        return self.cues[i]

    def new_id(self, stem: str = "cue") -> str:
        """An id not used yet: ``stem-1``, ``stem-2``, ..."""
        taken = {c.id for c in self.cues}
        k = 1
        while f"{stem}-{k}" in taken:
            k += 1
        return f"{stem}-{k}"


# ---------------------------------------------------------------- reading

def load_sheet(path: str | Path) -> Sheet:
    """Read and check a cue sheet file.

    Raises
    ------
    SheetError
        One line naming the sheet, the cue id and the field, for every kind of bad input.
    """
    path = Path(path)
    text = read_text(path, "cue sheet", SheetError, "check the path")
    sheet = parse_sheet(text, str(path))
    sheet.path = path
    return sheet


def parse_sheet(text: str, where: str = "sheet") -> Sheet:
    """Check the TOML text of a cue sheet (see :func:`load_sheet`)."""
    data = parse_toml(text, where, SheetError)
    try:
        sheet = _sheet_from_data(data, where)
    except InputError as exc:
        raise SheetError(exc.what, exc.where, exc.fix) from None
    sheet.header = _header_comments(text)
    return sheet


def _header_comments(text: str) -> str:
    """The comment block at the top of a TOML text (comment and blank lines before the first key)."""
    kept = []
    for line in text.split("\n"):  # TOML lines end at LF only (not at form feed or U+2028)
        line = line.removesuffix("\r")
        if line.strip().startswith("#"):
            kept.append(line.rstrip())
        elif line.strip():
            break
    return "\n".join(kept)


def _unknown(keys, allowed, where):
    for key in keys:
        if key not in allowed:
            near = difflib.get_close_matches(key, sorted(allowed), n=1)
            raise SheetError(f"unknown field {key!r}", where.format(key=key),
                             f"did you mean {near[0]!r}?" if near else
                             f"allowed here: {', '.join(sorted(allowed))}")


def _sheet_from_data(data: dict, where: str) -> Sheet:
    _unknown(data, _TOP_KEYS, f"{where}: {{key}}")
    fmt = data.get("format", FORMAT_VERSION)
    if isinstance(fmt, bool) or not isinstance(fmt, int):
        raise SheetError(f"format must be a whole number, got {fmt!r}", f"{where}: format",
                         f"write format = {FORMAT_VERSION}")
    if fmt > FORMAT_VERSION:
        raise SheetError(f"the sheet is format {fmt}, newer than this showkit reads ({FORMAT_VERSION})",
                         f"{where}: format", "update showkit to open it")
    if fmt < 1:
        raise SheetError(f"unknown format {fmt}", f"{where}: format", f"write format = {FORMAT_VERSION}")
    title = data.get("title", "Untitled show")
    if "rig" not in data:
        # never a silent default: the rig sets every level
        raise SheetError("the sheet names no rig", f"{where}: rig",
                         'add rig = "demo" for the bundled demo rig, or rig = "my_tube.toml" '
                         "(a path relative to the sheet)")
    rig = data["rig"]
    notes = data.get("notes", "")
    for key, value in (("title", title), ("rig", rig), ("notes", notes)):
        if not isinstance(value, str):
            raise SheetError(f"{key} must be text, got {value!r}", f"{where}: {key}", f'write {key} = "..."')
    raw_cues = data.get("cue", [])
    if not isinstance(raw_cues, list):
        raise SheetError("cues must be [[cue]] tables", f"{where}: cue", "write each cue as a [[cue]] table")
    if len(raw_cues) > MAX_CUES:
        raise SheetError(f"the sheet has {len(raw_cues)} cues, more than showkit runs in one show ({MAX_CUES})",
                         f"{where}: cue", "split the show into several sheets")
    cues, seen = [], set()
    for k, raw in enumerate(raw_cues):
        cue = _cue_from_data(raw, where, k)
        if cue.id in seen:
            raise SheetError(f"duplicate cue id {cue.id!r}", f"{where}: cue {cue.id}: id",
                             "give every cue its own id")
        seen.add(cue.id)
        cues.append(cue)
    return Sheet(title=title, rig=rig, cues=cues, format=fmt, notes=notes)


def _seconds(value, at: str, what: str = "duration", positive: bool = True) -> float:
    seconds = units.duration_s(value, at)
    if not math.isfinite(seconds):
        raise InputError(f"{what} must be a finite time (got {seconds})", at,
                         f"give a {what} in seconds or m:ss")
    if positive and not seconds > 0:
        raise InputError(f"{what} must be greater than zero (got {seconds:g} s)", at,
                         f"give a {what} in seconds or m:ss")
    if not positive and seconds < 0:
        raise InputError(f"{what} must not be negative (got {seconds:g} s)", at,
                         f"give a {what} of 0 or more seconds")
    return seconds


def _long(seconds: float) -> str:
    if not math.isfinite(seconds):
        return f"{seconds} s"
    if seconds >= 3600:
        return f"{seconds / 3600:.3g} h"
    if seconds >= 60:
        return f"{seconds / 60:.3g} min"
    return f"{seconds:.3g} s"


def _mode(value, at: str) -> int:
    if isinstance(value, bool) or not isinstance(value, int) or value < 0:
        raise InputError(f"a mode is a whole number 0 or more, got {value!r}", at,
                         "use a mode number from `showkit modes`")
    return value


def _freq(value, at: str) -> float:
    f = units.frequency_hz(value, at)
    if not f > 0:
        raise InputError(f"frequency must be above zero (got {f:g} Hz)", at, 'give e.g. "220 Hz"')
    return f


def _cue_from_data(raw, where: str, k: int) -> Cue:
    if not isinstance(raw, dict):
        raise SheetError("a cue must be a table", f"{where}: cue #{k + 1}", "write it as a [[cue]] table")
    cid = raw.get("id")
    if not isinstance(cid, str) or not cid.strip():
        raise SheetError("the cue has no id", f"{where}: cue #{k + 1}: id", 'add id = "intro" (unique text)')
    at = f"{where}: cue {cid}"
    _unknown(raw, _CUE_KEYS, at + ": {key}")
    kinds = [s for s in SOURCE_KINDS if s in raw]
    if len(kinds) != 1:
        raise SheetError("a cue needs exactly one source" + (f" (has {', '.join(kinds)})" if kinds else ""),
                         at, "give one of: audio = \"file\" with start/end, tone = {...}, glide = {...}, pause = {...}")
    kind = kinds[0]
    if kind != "audio":
        for key in ("start", "end"):
            if key in raw:
                raise SheetError(f"{key} belongs to audio cues", f"{at}: {key}", f"remove {key} from this {kind} cue")
    if kind == "audio":
        if not isinstance(raw["audio"], str) or not raw["audio"]:
            raise SheetError("audio must be a file path", f"{at}: audio", 'write audio = "tracks/song.flac"')
        start = _seconds(raw.get("start", 0.0), f"{at}: start", "start", positive=False)
        end = None if "end" not in raw else _seconds(raw["end"], f"{at}: end", "end")
        if end is not None and end <= start:
            raise SheetError(f"end ({end:g} s) is not after start ({start:g} s)", f"{at}: end",
                             "give an end later than the start")
        source: Source = AudioSource(raw["audio"], start, end)
    else:
        table = raw[kind]
        if not isinstance(table, dict):
            raise SheetError(f"{kind} must be a table", f"{at}: {kind}", f"write {kind} = {{ duration = 10 }}")
        allowed = {"tone": _TONE_KEYS, "glide": _GLIDE_KEYS, "pause": _PAUSE_KEYS}[kind]
        _unknown(table, allowed, f"{at}: {kind}.{{key}}")
        if "duration" not in table:
            raise SheetError("missing duration", f"{at}: {kind}.duration", 'add duration = "10 s"')
        duration = _seconds(table["duration"], f"{at}: {kind}.duration")
        if not duration <= MAX_GENERATED_S:  # also refuses inf and nan
            raise SheetError(f"a {kind} of {duration:.6g} s is longer than showkit makes "
                             f"({MAX_GENERATED_S:g} s = {_long(MAX_GENERATED_S)})", f"{at}: {kind}.duration",
                             "split it into several cues (see Limits in the README)")
        if kind == "pause":
            source = PauseSource(duration)
        elif kind == "tone":
            if ("mode" in table) == ("frequency" in table):
                raise SheetError("a tone needs either mode or frequency", f"{at}: tone",
                                 "write tone = { mode = 3, duration = 10 } or { frequency = \"220 Hz\", ... }")
            source = ToneSource(duration,
                                mode=_mode(table["mode"], f"{at}: tone.mode") if "mode" in table else None,
                                frequency_hz=_freq(table["frequency"], f"{at}: tone.frequency")
                                if "frequency" in table else None)
        else:
            ends = {}
            for side in ("from", "to"):
                has_mode, has_freq = f"{side}_mode" in table, f"{side}_frequency" in table
                if has_mode == has_freq:
                    raise SheetError(f"a glide needs either {side}_mode or {side}_frequency",
                                     f"{at}: glide", f"give {side}_mode = 2 or {side}_frequency = \"100 Hz\"")
                ends[f"{side}_mode"] = _mode(table[f"{side}_mode"], f"{at}: glide.{side}_mode") if has_mode else None
                ends[f"{side}_frequency_hz"] = (_freq(table[f"{side}_frequency"], f"{at}: glide.{side}_frequency")
                                               if has_freq else None)
            source = GlideSource(duration, **ends)
    gain = raw.get("gain", 0.0)
    if isinstance(gain, str):
        text = gain.strip().lower().removesuffix("db").strip()
        try:
            gain = float(text)
        except ValueError:
            raise SheetError(f"cannot read gain {raw['gain']!r}", f"{at}: gain", "write gain = -12 (dB)") from None
    if isinstance(gain, bool) or not isinstance(gain, (int, float)) or not math.isfinite(gain):
        raise SheetError(f"gain must be a number of dB, got {gain!r}", f"{at}: gain", "write gain = -12")
    then = raw.get("then", "wait")
    if then not in THEN_VALUES:
        raise SheetError(f"then must be \"wait\" or \"next\", got {then!r}", f"{at}: then",
                         'write then = "wait" (operator starts the next cue) or "next"')
    for key in ("label", "notes"):
        if key in raw and not isinstance(raw[key], str):
            raise SheetError(f"{key} must be text", f"{at}: {key}", f'write {key} = "..."')
    ride = raw.get("ride", False)
    if not isinstance(ride, bool):
        raise SheetError("ride must be true or false", f"{at}: ride", "write ride = true")
    lock = _lock_from_data(raw["lock"], f"{at}: lock") if "lock" in raw else None
    return Cue(id=cid, source=source, label=raw.get("label", ""), gain_db=float(gain),
               fade_in_s=_seconds(raw.get("fade_in", 0.0), f"{at}: fade_in", "fade_in", positive=False),
               fade_out_s=_seconds(raw.get("fade_out", 0.0), f"{at}: fade_out", "fade_out", positive=False),
               then=then, notes=raw.get("notes", ""), ride=ride, lock=lock)


def _lock_from_data(raw, at: str) -> Lock | None:
    if not isinstance(raw, dict):
        raise SheetError("lock must be a table", at, "remove it and run showkit lock")
    _unknown(raw, _LOCK_KEYS, at + ".{key}")
    try:
        def num(key, default=None):
            v = raw.get(key, default)
            if v is None:
                return None
            if isinstance(v, str) and v in ("inf", "+inf"):
                return math.inf
            return float(v)

        return Lock(ceiling_db=num("ceiling_db"), pressure_db=num("pressure_db", math.inf),
                    full_scale_db=num("full_scale_db", math.inf),
                    limited_by=str(raw.get("limited_by", "pressure")),
                    source_hash=str(raw["source_hash"]), rig_hash=str(raw["rig_hash"]),
                    calibration_hash=str(raw["calibration_hash"]), static_pa=num("static_pa"),
                    reserve=num("reserve"), analysis_version=int(raw["analysis_version"]),
                    locked_at=str(raw.get("locked_at", "")), worst_hole=int(raw.get("worst_hole", -1)),
                    worst_time_s=num("worst_time_s", 0.0), frequency_hz=num("frequency_hz"),
                    to_frequency_hz=num("to_frequency_hz"))
    except (KeyError, TypeError, ValueError, OverflowError) as exc:
        raise SheetError(f"the lock table is incomplete or damaged ({exc})", at,
                         "run showkit lock on the sheet again") from None


# ---------------------------------------------------------------- writing

def _toml_value(value) -> str:
    if isinstance(value, bool):
        return "true" if value else "false"
    if isinstance(value, int):
        return str(value)
    if isinstance(value, float):
        if math.isinf(value):
            return '"inf"' if value > 0 else '"-inf"'
        return repr(float(value))
    if isinstance(value, str):
        return '"' + _CONTROL.sub(_toml_escape, value.replace("\\", "\\\\").replace('"', '\\"')) + '"'
    raise TypeError(value)


# every control character TOML forbids raw in a basic string (all of C0 but tab, and DEL)
_CONTROL = re.compile("[\x00-\x08\x0a-\x1f\x7f]")
_SHORT_ESCAPES = {"\b": "\\b", "\n": "\\n", "\f": "\\f", "\r": "\\r"}


def _toml_escape(match: re.Match) -> str:
    ch = match.group(0)
    return _SHORT_ESCAPES.get(ch) or f"\\u{ord(ch):04X}"


def _inline(table: dict) -> str:
    return "{ " + ", ".join(f"{k} = {_toml_value(v)}" for k, v in table.items() if v is not None) + " }"


def sheet_to_text(sheet: Sheet) -> str:
    """The sheet as TOML text (what :func:`save_sheet` writes)."""
    lines = [sheet.header] if sheet.header else []
    lines += [f"title = {_toml_value(sheet.title)}", f"rig = {_toml_value(sheet.rig)}",
              f"format = {FORMAT_VERSION}"]
    if sheet.notes:
        lines.append(f"notes = {_toml_value(sheet.notes)}")
    for cue in sheet.cues:
        lines += ["", "[[cue]]", f"id = {_toml_value(cue.id)}"]
        if cue.label:
            lines.append(f"label = {_toml_value(cue.label)}")
        s = cue.source
        if isinstance(s, AudioSource):
            lines.append(f"audio = {_toml_value(s.path)}")
            lines.append(f"start = {_toml_value(float(s.start_s))}")
            if s.end_s is not None:
                lines.append(f"end = {_toml_value(float(s.end_s))}")
        elif isinstance(s, ToneSource):
            lines.append("tone = " + _inline({"mode": s.mode, "frequency": s.frequency_hz,
                                                "duration": float(s.duration_s)}))
        elif isinstance(s, GlideSource):
            lines.append("glide = " + _inline({"from_mode": s.from_mode, "from_frequency": s.from_frequency_hz,
                                                 "to_mode": s.to_mode, "to_frequency": s.to_frequency_hz,
                                                 "duration": float(s.duration_s)}))
        else:
            lines.append("pause = " + _inline({"duration": float(s.duration_s)}))
        lines.append(f"gain = {_toml_value(float(cue.gain_db))}")
        lines.append(f"fade_in = {_toml_value(float(cue.fade_in_s))}")
        lines.append(f"fade_out = {_toml_value(float(cue.fade_out_s))}")
        lines.append(f"then = {_toml_value(cue.then)}")
        if cue.ride:
            lines.append("ride = true")
        if cue.notes:
            lines.append(f"notes = {_toml_value(cue.notes)}")
        if cue.lock is not None:
            lines += ["", "[cue.lock]"]
            for key, value in cue.lock.__dict__.items():
                if value is not None:
                    lines.append(f"{key} = {_toml_value(value)}")
    return "\n".join(lines) + "\n"


def save_sheet(sheet: Sheet, path: str | Path | None = None, _before_rename=None) -> Path:
    """Save the sheet safely (:func:`showkit.safesave.write_text`); returns the path written.

    Never over one of the sheet's own audio files or its rig file.
    """
    from showkit.errors import OutputError

    target = Path(path) if path is not None else sheet.path
    if target is None:
        raise SheetError("the sheet has no file name yet", None, "save it with a path")
    text = sheet_to_text(sheet)
    parse_sheet(text, str(target))  # never write what we could not read back
    try:
        write_text(target, text, backups=1, _before_rename=_before_rename,
                   protect=sheet_inputs(sheet, include_sheet=False), what="cue sheet")
    except OutputError as exc:
        raise SheetError(f"cannot save ({exc.what})", exc.where,
                         "check the folder exists and is writable; the previous version is untouched") from None
    sheet.path = target
    return target


def sheet_inputs(sheet: Sheet, include_sheet: bool = True) -> list[tuple[Path, str]]:
    """The files the show reads, as ``(path, role)``: its sheet, its rig and every cue's audio.

    Writers are given these so that nothing showkit writes lands on one of them.
    """
    out: list[tuple[Path, str]] = []
    if include_sheet and sheet.path is not None:
        out.append((sheet.path, "the cue sheet itself"))
    try:
        rig = sheet.rig_path()
    except (OSError, RuntimeError):
        rig = None
    if rig is not None:
        out.append((rig, "the sheet's rig file"))
    for cue in sheet.cues:
        if isinstance(cue.source, AudioSource) and not cue.source.path.startswith(DEMO_AUDIO_PREFIX):
            p = Path(cue.source.path).expanduser()
            out.append((p if p.is_absolute() else sheet.folder / p, f"the source audio of cue {cue.id}"))
    return out
