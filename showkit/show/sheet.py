"""The cue sheet: a presenter's show file (TOML), read, checked and saved safely.

A sheet has ``title``, ``rig`` (path relative to the sheet, or ``"demo"``; required),
``format`` (an integer version) and ``[[cue]]`` tables in show order.  Each cue
has an ``id``, a ``label``, exactly one source (``audio`` with ``start`` and
``end``; ``tone``; ``glide``; ``pause``), a ``gain`` in dB, ``fade_in``,
``fade_out``, ``then`` (``"wait"`` or ``"next"``), ``notes``, optional
``ride``, and the ``[cue.lock]`` table showkit writes.  See the README.

Saving writes only what changed into the text the sheet was read from (tomlkit),
so the presenter's comments and spelling stay, and writes only finite numbers
(see "writing" below).  It never loses data: the new text goes to a temporary file in the same
folder, is flushed and fsync'd, the previous version is kept as
``NAME.toml.bak``, and the temporary file is renamed over the sheet.
A sheet that does not parse is never overwritten; unknown keys are refused
with a message, never dropped silently.
"""

from __future__ import annotations

import difflib
import math
from dataclasses import dataclass, field, replace
from pathlib import Path

from showkit import units
from showkit.demo_files import demo_audio_path
from showkit.errors import InputError, OutputError, SheetError
from showkit.limits import MAX_CUES, MAX_GENERATED_S
from showkit.physics.ceiling import combine
from showkit.rigfile import looks_like_rig
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


def describe_source(source: Source, short: bool = False) -> str:
    """A cue's source in words: the show book's line, or with ``short`` the cue list's.

    Parameters
    ----------
    source : Source
        The cue's source (times in s, frequencies in Hz).
    short : bool
        The cue list's form: the file's name only, frequencies rounded, no "audio"/"on".
    """
    def end(which_mode, which_hz, digits):
        return f"mode {which_mode}" if which_mode is not None else f"{which_hz:{digits}} Hz"

    s = source
    if isinstance(s, AudioSource):
        if short:
            stop = "end" if s.end_s is None else units.format_time(s.end_s)
            return f"{Path(s.path.removeprefix('demo:')).name} {units.format_time(s.start_s)}-{stop}"
        stop = "the end" if s.end_s is None else units.format_time(s.end_s)
        return f"audio {s.path}, {units.format_time(s.start_s)} to {stop}"
    if isinstance(s, ToneSource):
        what = end(s.mode, s.frequency_hz, ".1f" if short else "g")
        return f"tone {what}, {s.duration_s:g} s" if short else f"tone on {what}, {s.duration_s:g} s"
    if isinstance(s, GlideSource):
        digits = ".0f" if short else "g"
        a, b = end(s.from_mode, s.from_frequency_hz, digits), end(s.to_mode, s.to_frequency_hz, digits)
        return f"glide {a} to {b}, {s.duration_s:g} s"
    if isinstance(s, PauseSource):
        return f"pause {s.duration_s:g} s" if short else f"pause (talk), {s.duration_s:g} s"
    return s.kind


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
    header: str = ""  # the comment lines at the top of the file (written for a sheet made in memory)
    #: The TOML text the sheet was read from: saving edits it in place (comments and spelling stay).
    source_text: str = field(default="", repr=False, compare=False)
    #: What was read (title, rig, notes and each cue by id): only what differs from it is written.
    origin: dict = field(default_factory=dict, repr=False, compare=False)
    #: The writer's edited tomlkit document and what it says (see :func:`sheet_to_text`).
    _writer: dict = field(default_factory=dict, init=False, repr=False, compare=False)

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
    sheet.source_text = text
    sheet.origin = {"title": sheet.title, "rig": sheet.rig, "notes": sheet.notes,
                    "cues": {c.id: c for c in sheet.cues}}
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
    if looks_like_rig(data):
        # `lock RIG.toml` said "unknown field 'name'": every command reading a sheet comes here
        raise SheetError("this is a rig file, not a cue sheet", where,
                         "give the cue sheet; a sheet names its rig in its `rig = \"...\"` line")
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
    gain = units.gain_db(raw.get("gain", 0.0), f"{at}: gain", "write gain = -12 (dB)", error=SheetError)
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
#
# One writer, on tomlkit (as :mod:`showkit.rigwrite`): the text the sheet was read from is
# parsed again and edited in place, so the presenter's comments (at the top, between cues
# and inside them) and their spelling of every value showkit did not change ("0:08",
# "12 s", -34) stay.  Only the fields that differ from what was read are written; a cue
# that is new is written whole.  Every number written is finite (a non-finite one is a
# SheetError before anything is written): gains and lock levels rounded down to 0.01 dB,
# lock times to 1 ms, everything else as the shortest text that reads back the same float.

#: Levels are written to this step, dB (rounded down: never above what was computed or asked).
DB_STEP = 0.01


def floor_db(value_db: float) -> float:
    """``value_db`` rounded down to :data:`DB_STEP` (a float that prints as e.g. ``-21.33``).

    A non-finite value is returned as it is (for the caller to refuse).
    """
    if not math.isfinite(value_db):
        return value_db
    return math.floor(value_db * 100.0 + 1e-9) / 100.0


def _clean(value: float, digits: int = 12) -> float:
    """The float without binary noise (``1000.0000000000001`` -> ``1000.0``)."""
    return float(f"{value:.{digits}g}")


def rounded_lock(lock: Lock) -> Lock:
    """The lock as it is written: levels down to 0.01 dB, the worst moment to 1 ms.

    The two limits are rounded down and the ceiling is again the lower of them
    (:func:`showkit.physics.ceiling.combine`), so it stays consistent
    (:func:`showkit.show.lock.lock_problem`) and never rises.  ``static_pa`` and ``reserve`` are the conditions today's ceiling is rescaled from, so they keep 12
    significant digits (a rig's 10 cm H2O is 980.665 Pa: at 0.01 Pa every check of that
    rig would see a ceiling 0.00004 dB off); frequencies likewise.  +inf limits stay
    +inf in memory and are left out of the file (an absent limit reads as no limit).
    """
    def db(value):
        return value if value == math.inf else floor_db(value)

    pressure, full_scale = db(lock.pressure_db), db(lock.full_scale_db)
    if not math.isfinite(lock.ceiling_db) or not all(v == math.inf or math.isfinite(v)
                                                     for v in (lock.pressure_db, lock.full_scale_db)):
        return lock  # damaged: kept as it is, for the writer (or lock_problem) to refuse, never repaired
    if abs(combine(lock.pressure_db, lock.full_scale_db).ceiling_db - lock.ceiling_db) > 1e-6:
        return lock  # inconsistent: kept as it is (read back, lock_problem calls it stale)
    # the ceiling is again the lower of the rounded limits (a tie is "pressure", as combine says)
    ceiling = combine(pressure, full_scale)
    return replace(lock, ceiling_db=ceiling.ceiling_db, limited_by=ceiling.limited_by,
                   pressure_db=pressure, full_scale_db=full_scale,
                   static_pa=_clean(lock.static_pa), reserve=_clean(lock.reserve),
                   worst_time_s=round(lock.worst_time_s, 3)
                   if math.isfinite(lock.worst_time_s) else lock.worst_time_s,
                   frequency_hz=None if lock.frequency_hz is None else _clean(lock.frequency_hz),
                   to_frequency_hz=None if lock.to_frequency_hz is None else _clean(lock.to_frequency_hz))


def _number(value, at: str, inf_ok: bool = False):
    """A finite int/float to write, or a SheetError (nothing is written)."""
    if isinstance(value, bool) or not isinstance(value, (int, float)):
        raise SheetError(f"{value!r} is not a number", at, "nothing was saved; report this")
    if isinstance(value, int):
        return value
    if not math.isfinite(value) and not (inf_ok and value == math.inf):
        raise SheetError(f"will not write a non-finite number ({value!r})", at,
                         "nothing was saved; lock the cue again or set the value")
    return float(value)


def _gain(value: float, at: str) -> float:
    return floor_db(_number(value, at))


def _lock_values(lock: Lock, at: str) -> dict:
    """The ``[cue.lock]`` keys and values written for a lock (finite numbers only)."""
    out = {}
    for key, value in rounded_lock(lock).__dict__.items():
        if value is None:
            continue
        if isinstance(value, str):
            out[key] = value
        elif key in ("pressure_db", "full_scale_db"):
            if _number(value, f"{at}: lock.{key}", inf_ok=True) != math.inf:  # absent: no limit
                out[key] = value
        else:
            out[key] = _number(value, f"{at}: lock.{key}")
    return out


def _write_lock(table, lock: Lock | None, at: str) -> None:
    """Update ``[cue.lock]`` key by key (its comments, and those after it, stay)."""
    import tomlkit

    if lock is None:
        old = table.get("lock")
        # the comments and blank lines at the end of [cue.lock] belong to what follows (the
        # next cue's comment, moved there when the lock was written): they stay when it goes
        trailing = _trailing(old) if isinstance(old, dict) else []
        _set(table, "lock", None)
        for item in trailing:
            table.add(item)
        return
    values = _lock_values(lock, at)
    old = table.get("lock")
    if not isinstance(old, dict):
        _set(table, "lock", None)
        old = tomlkit.table()
        trailing = _trailing(table)  # the blank line / comments before the next cue go after the lock
        table.append("lock", old)
        for item in trailing:
            old.add(item)
    for key in [k for k in old if k not in values]:
        del old[key]
    for key, value in values.items():
        if key not in old or old[key] != value:
            _set(old, key, value)


def _source_items(source: Source, at: str) -> dict:
    """The cue keys a source is written as (``None``: the key is left out)."""
    import tomlkit

    if isinstance(source, AudioSource):
        return {"audio": source.path, "start": _number(float(source.start_s), f"{at}: start"),
                "end": None if source.end_s is None else _number(float(source.end_s), f"{at}: end")}
    fields = {"tone": (("mode", "mode"), ("frequency", "frequency_hz")),
              "glide": (("from_mode", "from_mode"), ("from_frequency", "from_frequency_hz"),
                        ("to_mode", "to_mode"), ("to_frequency", "to_frequency_hz")),
              "pause": ()}[source.kind]
    table = tomlkit.inline_table()
    for key, attr in fields:
        value = getattr(source, attr)
        if value is not None:
            table[key] = _number(value, f"{at}: {source.kind}.{key}")
    _set(table, "duration", _number(float(source.duration_s), f"{at}: {source.kind}.duration"))
    return {source.kind: table}


def _trailing(table) -> list:
    """Take the comments and blank lines off the end of a table (tomlkit's ``Container.body``)."""
    from tomlkit.items import Comment, Whitespace

    body = table.value.body if hasattr(table, "value") and hasattr(table.value, "body") else None
    trailing = []
    while body and body[-1][0] is None:
        item = body.pop()[1]
        # a key tomlkit deleted leaves a keyless placeholder: dropped (only comments and blank
        # lines move; a placeholder moved into [cue.lock] made the sheet unwritable)
        if isinstance(item, (Comment, Whitespace)):
            trailing.insert(0, item)
    return trailing


def _set(table, key: str, value) -> None:
    """Set, replace or (``None``) remove a key; a new key goes after the table's last key.

    tomlkit appends a new key after the table's trailing comments and blank lines, which
    belong to what follows (the next cue's comment): they are taken off and put back after
    it.  (tomlkit keeps them as the tail of its ``Container.body``.)
    """
    if value is None:
        if key in table:
            del table[key]
        return
    if key in table:
        table[key] = value
        return
    trailing = _trailing(table)
    table[key] = value
    for item in trailing:
        table.add(item)


def _write_source(table, old: Source | None, new: Source, at: str) -> None:
    if old == new:
        return
    items = _source_items(new, at)
    if old is not None and old.kind == new.kind == "audio":
        for key, attr in (("audio", "path"), ("start", "start_s"), ("end", "end_s")):
            if getattr(old, attr) != getattr(new, attr):
                _set(table, key, items[key])
        return
    for key in (*SOURCE_KINDS, "start", "end"):
        if key in table and key not in items:
            del table[key]
    for key, value in items.items():
        _set(table, key, value)


def _cue_table(cue: Cue, old: Cue | None, table, at: str):
    """Write into ``table`` (the cue as read, or a new table) the fields that differ from ``old``."""
    import tomlkit

    if table is None:
        table, old = tomlkit.table(), None
    if old is None or old.id != cue.id:
        _set(table, "id", cue.id)
    if old is None or old.label != cue.label:
        _set(table, "label", cue.label or None)
    _write_source(table, old.source if old else None, cue.source, at)
    if old is None or old.gain_db != cue.gain_db:
        _set(table, "gain", _gain(cue.gain_db, f"{at}: gain"))
    if old is None or old.fade_in_s != cue.fade_in_s:
        _set(table, "fade_in", _number(float(cue.fade_in_s), f"{at}: fade_in"))
    if old is None or old.fade_out_s != cue.fade_out_s:
        _set(table, "fade_out", _number(float(cue.fade_out_s), f"{at}: fade_out"))
    if old is None or old.then != cue.then:
        _set(table, "then", cue.then)
    if old is None or old.ride != cue.ride:
        _set(table, "ride", True if cue.ride else None)
    if old is None or old.notes != cue.notes:
        _set(table, "notes", cue.notes or None)
    if old is None or old.lock != cue.lock:
        _write_lock(table, cue.lock, at)
    return table


def _blank_after(table) -> None:
    """End a cue's table with a blank line (before the next ``[[cue]]``)."""
    import tomlkit

    if not table.as_string().endswith("\n\n"):
        last = table.get("lock") if isinstance(table.get("lock"), dict) else table
        last.add(tomlkit.nl())


def sheet_to_text(sheet: Sheet) -> str:
    """The sheet as TOML text (what :func:`save_sheet` writes).

    The text the sheet was read from is edited in place (see the notes above); a sheet
    made in memory is written whole, with its ``header`` comment lines first.  The
    edited document is kept with the sheet, so a later call only writes what changed
    since (tomlkit parses a 400-cue sheet in about a second; editing it takes
    milliseconds), and the text of an unchanged sheet is given again without work.
    """
    key = (sheet.source_text, sheet.title, sheet.rig, sheet.notes, sheet.header, tuple(sheet.cues))
    cache = sheet._writer
    if cache.get("key") == key:
        return cache["text"]
    try:
        text = _edit_document(sheet, cache)
    except BaseException:
        cache.clear()  # a half-edited document is never used again
        raise
    cache["key"], cache["text"] = key, text
    return text


def _edit_document(sheet: Sheet, cache: dict) -> str:
    import tomlkit

    where = str(sheet.path or "sheet")
    if cache.get("source") != sheet.source_text or "doc" not in cache:
        if sheet.source_text:
            doc = tomlkit.parse(sheet.source_text)
        else:
            doc = tomlkit.document()
            for line in sheet.header.split("\n") if sheet.header else ():
                doc.add(tomlkit.comment(line.lstrip("#").removeprefix(" ")) if line.strip() else tomlkit.nl())
            if sheet.header:
                doc.add(tomlkit.nl())
        cache.clear()
        cache.update(source=sheet.source_text, doc=doc, state=dict(sheet.origin))
    doc, state = cache["doc"], cache["state"]
    for key in ("title", "rig"):
        if state.get(key) != getattr(sheet, key):
            doc[key] = getattr(sheet, key)
    if doc.get("format") != FORMAT_VERSION:
        doc["format"] = FORMAT_VERSION
    if state.get("notes", "") != sheet.notes:
        _set(doc, "notes", sheet.notes or None)
    aot = doc.get("cue")
    if aot is None:
        aot = tomlkit.aot()
        if sheet.cues:
            doc.add(tomlkit.nl())
            doc.append("cue", aot)
    tables = {}
    for table in aot:
        tables.setdefault(str(table.get("id")), table)
    old_order = list(aot)
    old_cues = state.get("cues", {})
    order = []
    for cue in sheet.cues:
        table = tables.pop(cue.id, None)
        old = old_cues.get(cue.id) if table is not None else None
        order.append(_cue_table(cue, old, table, f"{where}: cue {cue.id}"))
    if [id(t) for t in order] != [id(t) for t in old_order]:  # cues moved, added or removed
        while len(aot):
            del aot[0]
        for k, table in enumerate(order):
            if k < len(order) - 1:
                _blank_after(table)
            aot.append(table)
        if not order and "cue" in doc:
            del doc["cue"]
    # what the document says now: the next call writes only what differs from it
    cache["state"] = {"title": sheet.title, "rig": sheet.rig, "notes": sheet.notes,
                      "cues": {c.id: c for c in sheet.cues}}
    text = tomlkit.dumps(doc)
    return text if text.endswith("\n") else text + "\n"


def save_sheet(sheet: Sheet, path: str | Path | None = None, _before_rename=None) -> Path:
    """Save the sheet safely (:func:`showkit.safesave.write_text`); returns the path written.

    Never over one of the sheet's own audio files or its rig file.
    """
    target = Path(path) if path is not None else sheet.path
    if target is None:
        raise SheetError("the sheet has no file name yet", None, "save it with a path")
    text = sheet_to_text(sheet)
    again = parse_sheet(text, str(target))  # never write what we could not read back
    try:
        write_text(target, text, backups=1, _before_rename=_before_rename,
                   protect=sheet_inputs(sheet, include_sheet=False), what="cue sheet")
    except OutputError as exc:
        raise SheetError(f"cannot save ({exc.what})", exc.where,
                         "check the folder exists and is writable; the previous version is untouched") from None
    sheet.path = target
    # later edits are measured from what is on disk; the edited document stays valid for it
    sheet.source_text, sheet.origin = text, again.origin
    if sheet._writer.get("text") == text:
        sheet._writer["source"] = text
        sheet._writer["key"] = (text, *sheet._writer["key"][1:])
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
