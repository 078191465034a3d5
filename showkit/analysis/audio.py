"""Audio in: read, check, mix to mono and resample.

Every file showkit reads goes through here, so that bad audio gets one clear
:class:`~showkit.errors.AudioError` -- never a crash, never a silently wrong
answer.  Channels are averaged to mono (the tube has one speaker).
Resampling uses the SoX resampler (``soxr``, high quality), in a streaming
form for long files so that memory stays bounded.

Reads whatever libsndfile reads (WAV, FLAC, OGG/Vorbis, Opus, MP3 from
libsndfile 1.1 on, AIFF, ...).
"""

from __future__ import annotations

import hashlib
import math
import os
from dataclasses import dataclass
from pathlib import Path
from typing import Iterator

import numpy as np

from showkit.errors import AudioError
from showkit.fileio import quiet_native_stderr
from showkit.limits import (AUDIO_MAX_BYTES, MAX_CUE_SAMPLES, MAX_RATE_HZ, MAX_SAMPLE_MAGNITUDE, MIN_AUDIO_S,
                            MIN_RATE_HZ)
from showkit.units import format_count

#: Files shorter than this many samples cannot be analysed.
MIN_FRAMES = 1
#: Reading block, frames at the file's rate.
READ_BLOCK = 1 << 16


@dataclass(frozen=True)
class AudioInfo:
    """What the file says about itself."""

    path: Path
    rate_hz: int
    channels: int
    frames: int
    format: str

    @property
    def duration_s(self) -> float:
        return self.frames / self.rate_hz


@dataclass(frozen=True)
class Audio:
    """Mono samples at ``rate_hz`` of a file or a passage of it.

    ``samples`` are float64 in digital full scale (1.0 = 0 dBFS);
    ``start_s`` is where they begin in the file.
    """

    samples: np.ndarray
    rate_hz: int
    start_s: float
    info: AudioInfo | None = None

    @property
    def duration_s(self) -> float:
        return self.samples.size / self.rate_hz


def audio_info(path: str | Path) -> AudioInfo:
    """Check that ``path`` is a readable audio file and say what it holds."""
    import soundfile as sf

    from showkit.fileio import check_audio_file

    path = Path(path)
    where = str(path)
    st = check_audio_file(path, AudioError)  # a regular file within the size limit, or one line
    if st.st_size == 0:
        raise AudioError("the file is empty (0 bytes)", where, "export the track again")
    try:
        with quiet_native_stderr():
            info = sf.info(str(path))
    except Exception as exc:  # libsndfile's errors are not one class across versions
        _damaged_wav(path, where)
        why = _short(exc)
        if "does not exist or is not a regular file" in str(exc):
            # libsndfile's words for bytes it cannot place (the file was checked: it is a regular file)
            why = "its format is not recognised"
        raise AudioError(f"not an audio file showkit can read ({why})", where,
                         "convert it to WAV or FLAC") from None
    # a WAV cut short says so first (cut inside its header it would read as too short or empty)
    _check_wav_length(path, st.st_size, where)
    if info.frames <= 0 or info.samplerate <= 0:
        raise AudioError("the file holds no samples", where, "export the track again")
    if info.channels < 1:
        raise AudioError("the file has no channels", where, "export the track again")
    if info.samplerate > MAX_RATE_HZ:
        raise AudioError(f"the sample rate {info.samplerate} Hz is above showkit's limit "
                         f"({MAX_RATE_HZ} Hz)", where, "resample it to 48 kHz or 96 kHz")
    if info.samplerate < MIN_RATE_HZ:
        raise AudioError(f"the sample rate {info.samplerate} Hz is below showkit's limit ({MIN_RATE_HZ} Hz): "
                         f"a damaged header, or audio too coarse for the tube's modes", where,
                         "export the track again at 44.1 or 48 kHz")
    if info.frames < MIN_AUDIO_S * info.samplerate:
        raise AudioError(f"the audio is only {1000.0 * info.frames / info.samplerate:.3g} ms long "
                         f"({format_count(info.frames, 'sample')} at {info.samplerate} Hz; shortest: {MIN_AUDIO_S:g} s)", where,
                         f"give a track or recording longer than {MIN_AUDIO_S:g} s")
    return AudioInfo(path=path, rate_hz=int(info.samplerate), channels=int(info.channels),
                     frames=int(info.frames), format=str(info.format))


def _wav_header(path: Path) -> dict | None:
    """The ``fmt`` fields and the ``data`` chunk of a RIFF/WAVE file, read from its header.

    ``{"channels", "rate_hz", "block_align", "data_bytes", "data_offset"}`` (a
    field is absent when its chunk is missing or short), or ``None`` for a file
    that is not RIFF/WAVE.  Only the header is read: a handful of chunks before
    the data (Microsoft/IBM RIFF WAVE layout: ``fmt`` holds format tag, channels,
    sample rate, byte rate, block align as little-endian integers).
    """
    import struct

    try:
        with open(path, "rb") as f:
            head = f.read(12)
            if len(head) < 12 or head[:4] != b"RIFF" or head[8:12] != b"WAVE":
                return None
            out: dict = {}
            offset = 12
            for _ in range(64):  # a WAV has a handful of chunks before its data
                f.seek(offset)
                chunk = f.read(8)
                if len(chunk) < 8:
                    return out
                cid, length = chunk[:4], struct.unpack("<I", chunk[4:])[0]
                if cid == b"fmt ":
                    fmt = f.read(16)
                    if len(fmt) >= 14:
                        _tag, channels, rate, _byte_rate, align = struct.unpack("<HHIIH", fmt[:14])
                        out.update(channels=channels, rate_hz=rate, block_align=align)
                elif cid == b"data":
                    out.update(data_bytes=length, data_offset=offset + 8)
                    return out
                offset += 8 + length + (length & 1)
            return out
    except OSError as exc:
        raise AudioError(f"cannot read the file ({exc.strerror})", str(path), "check its permissions") from None


def _damaged_wav(path: Path, where: str) -> None:
    """Say what is wrong with a WAV header libsndfile refused, when the header itself shows it."""
    head = _wav_header(path) or {}
    rate, channels = head.get("rate_hz"), head.get("channels")
    if rate is not None and not MIN_RATE_HZ <= rate <= MAX_RATE_HZ:
        raise AudioError(f"the WAV header says a sample rate of {rate} Hz (showkit reads {MIN_RATE_HZ} to "
                         f"{MAX_RATE_HZ} Hz): a damaged header", where, "export the track again at 44.1 or 48 kHz")
    if channels == 0:
        raise AudioError("the WAV header says 0 channels: a damaged header", where, "export the track again")


def _check_wav_length(path: Path, size: int, where: str) -> None:
    """Refuse a WAV whose header promises more sample data than the file holds.

    libsndfile quietly reads what is there when a WAV is cut short, so the
    header is read here: the ``data`` chunk's length against the bytes that
    follow it.  A file cut short (a copy or a download broken off, a header
    claiming 4 GB) is refused, never analysed as if it were whole.
    """
    head = _wav_header(path)
    if not head or "data_bytes" not in head:
        return
    length, align = head["data_bytes"], head.get("block_align", 0)
    present = size - head["data_offset"]
    if length > present and align > 0:
        raise AudioError(
            f"the file is cut short (truncated): its header says {length // align} frames "
            f"({length} bytes of samples) but only {present // align} are present",
            where, "copy or export the file again; showkit will not guess at the missing part")


def _short(exc: Exception) -> str:
    text = " ".join(str(exc).split())
    return text[:120] if text else exc.__class__.__name__


def _seconds(t: float) -> str:
    """A time in seconds with as many decimals as it takes (up to 6) to tell it from its neighbours."""
    return f"{t:.6f}".rstrip("0").rstrip(".") if abs(t) < 1e9 else f"{t:g}"


def _span(info: AudioInfo, start_s: float | None, end_s: float | None) -> tuple[int, int]:
    where = str(info.path)
    start = 0.0 if start_s is None else float(start_s)
    end = info.duration_s if end_s is None else float(end_s)
    if not (math.isfinite(start) and math.isfinite(end)):
        raise AudioError("start and end must be finite times", where, "give times in seconds or m:ss")
    if start < 0:
        raise AudioError(f"start {start:g} s is before the beginning", where, "give a start of 0 or later")
    if start >= info.duration_s:
        raise AudioError(f"start {_seconds(start)} s is past the end of the track ({_seconds(info.duration_s)} s)",
                         where, "give a start within the track")
    if end <= start:
        raise AudioError(f"end {_seconds(end)} s is not after start {_seconds(start)} s", where,
                         "give an end later than the start")
    if end > info.duration_s + 1e-6:
        raise AudioError(f"end {_seconds(end)} s is past the end of the track ({_seconds(info.duration_s)} s)",
                         where, "give an end within the track")
    if min(end, info.duration_s) - start < MIN_AUDIO_S:
        raise AudioError(f"the passage {_seconds(start)}-{_seconds(min(end, info.duration_s))} s is "
                         f"{1000.0 * (min(end, info.duration_s) - start):.3g} ms long (shortest: {MIN_AUDIO_S:g} s)",
                         where, f"give a passage of at least {MIN_AUDIO_S:g} s")
    first = int(round(start * info.rate_hz))
    last = min(info.frames, int(round(end * info.rate_hz)))
    return first, max(last, first + 1)


def read_blocks(path: str | Path, rate_hz: int | None = None, start_s: float | None = None,
                end_s: float | None = None, block_frames: int = READ_BLOCK,
                on_native=None) -> Iterator[np.ndarray]:
    """Mono float64 blocks of a file (or passage), resampled to ``rate_hz``.

    Streams: memory stays bounded whatever the file's length.  Raises
    :class:`AudioError` for unreadable, truncated or non-finite audio.

    Parameters
    ----------
    path : path
    rate_hz : int, optional
        Output rate, Hz (default: the file's rate).
    start_s, end_s : float, optional
        Passage within the file, s.
    block_frames : int
        Frames read per block at the file's rate.
    on_native : callable, optional
        Called with every mono block at the file's own rate (e.g. to track the
        digital peak of what will be played).
    """
    import soundfile as sf

    info = audio_info(path)
    first, last = _span(info, start_s, end_s)
    where = str(info.path)
    resampler = None
    if rate_hz is not None and int(rate_hz) != info.rate_hz:
        import soxr

        resampler = soxr.ResampleStream(info.rate_hz, int(rate_hz), 1, dtype="float64", quality="HQ")
    got = 0
    wanted = last - first
    try:
        with sf.SoundFile(str(info.path)) as f:
            f.seek(first)
            while got < wanted:
                n = min(block_frames, wanted - got)
                data = f.read(n, dtype="float64", always_2d=True)
                if data.shape[0] == 0:
                    break
                got += data.shape[0]
                mono = data.mean(axis=1)
                within = np.abs(mono) <= MAX_SAMPLE_MAGNITUDE      # False for NaN too
                if not within.all():
                    bad = int(np.argmax(~within))
                    t = (first + got - data.shape[0] + bad) / info.rate_hz
                    raise AudioError(f"{_bad_sample(mono[bad])} (first at {t:.3f} s)",
                                     where, "repair or re-export the file")
                if on_native is not None:
                    on_native(mono)
                yield resampler.resample_chunk(mono) if resampler else mono
            if resampler is not None:
                yield resampler.resample_chunk(np.zeros(0), last=True)
    except AudioError:
        raise
    except Exception as exc:
        raise AudioError(f"the file cannot be decoded ({_short(exc)})", where,
                         "it may be damaged: re-export or convert it") from None
    if got < wanted:
        raise AudioError(f"the file is truncated: it says {info.frames} frames but ends after "
                         f"{first + got}", where, "re-export or re-copy the file")


def load_audio(path: str | Path, rate_hz: int | None = None, start_s: float | None = None,
               end_s: float | None = None) -> Audio:
    """The whole file (or passage) as mono samples at ``rate_hz`` (default: the file's rate).

    The passage is held whole in memory: at most :data:`showkit.limits.MAX_CUE_SAMPLES`
    samples (at the file's rate and at ``rate_hz``); longer ones get one line.
    """
    info = audio_info(path)
    first, last = _span(info, start_s, end_s)
    out_frames = (last - first) * (int(rate_hz) / info.rate_hz if rate_hz else 1.0)
    if max(last - first, out_frames) > MAX_CUE_SAMPLES:
        raise AudioError(f"the passage is {(last - first) / info.rate_hz:.0f} s long, more than showkit holds "
                         f"in memory ({MAX_CUE_SAMPLES / max(info.rate_hz, rate_hz or 0):.0f} s at "
                         f"{max(info.rate_hz, rate_hz or 0)} Hz)", str(info.path),
                         "use a shorter passage (start/end), or split it into several cues")
    blocks = list(read_blocks(path, rate_hz, start_s, end_s))
    samples = np.concatenate(blocks) if blocks else np.zeros(0)
    first, _ = _span(info, start_s, end_s)
    if samples.size < MIN_FRAMES:
        raise AudioError("the passage holds no samples", str(info.path), "choose a longer passage")
    return Audio(samples=samples, rate_hz=int(rate_hz or info.rate_hz),
                 start_s=first / info.rate_hz, info=info)


def mono(samples) -> np.ndarray:
    """A signal to play or model (1-D, or frames x channels) as one float64 channel, the
    channels averaged as every file is read here (the tube has one speaker); an AudioError
    for NaN or infinite samples."""
    x = np.asarray(samples, dtype=float)
    if x.ndim == 2:
        x = x.mean(axis=1)
    within = np.abs(x) <= MAX_SAMPLE_MAGNITUDE                   # False for NaN too
    if not within.all():
        raise AudioError(_bad_sample(x[int(np.argmax(~within))], "the signal"), None, "repair the source")
    return x


def _bad_sample(value: float, what: str = "the audio") -> str:
    """What is wrong with a sample of ``what`` that is not finite or is beyond :data:`MAX_SAMPLE_MAGNITUDE`."""
    if not np.isfinite(value):
        return f"{what} holds NaN or infinite samples"
    return (f"{what} holds a sample of {value:.3g} times full scale ({20 * np.log10(abs(value)):.0f} dB over "
            f"it; showkit reads up to {20 * np.log10(MAX_SAMPLE_MAGNITUDE):.0f} dB over): not audio to play")


def first_channel(recording) -> np.ndarray:
    """A measurement recording (1-D, or frames x channels) as float64: its first channel, the
    microphone.  Not averaged: another channel (silent, or another input) would change the
    level read, and so a calibration.  Finite values are checked where a recording is read."""
    x = np.asarray(recording, dtype=float)
    return x[:, 0] if x.ndim == 2 else x


def content_hash(path: str | Path) -> str:
    """SHA-256 of the file's bytes (hex): the key for caches.

    Bounded: the file is checked first (:func:`showkit.fileio.open_checked`: a
    regular file, at most :data:`showkit.limits.AUDIO_MAX_BYTES`), and at most
    its size at that moment is read, so a pipe, a device or a file that keeps
    growing cannot make it run forever.
    """
    from showkit.fileio import open_checked

    digest = hashlib.sha256()
    with open_checked(path, "audio file", AudioError) as f:
        left = min(os.fstat(f.fileno()).st_size, AUDIO_MAX_BYTES)
        try:
            while left > 0:
                chunk = f.read(min(1 << 20, left))
                if not chunk:
                    break
                digest.update(chunk)
                left -= len(chunk)
        except OSError as exc:
            raise AudioError(f"cannot read the file ({exc.strerror})", str(path), "check the path") from None
    return digest.hexdigest()


def read_whole(path: str | Path, role: str = "recording") -> tuple[np.ndarray, int]:
    """A whole recording as float64 (frames, or frames x channels) and its rate, checked.

    For measurements, which need every channel as recorded: the same checks as
    :func:`audio_info` (a regular file, size, rate, cut short) and at most
    :data:`showkit.limits.MAX_CUE_SAMPLES` frames x channels in memory.
    """
    import soundfile as sf

    try:
        info = audio_info(path)
    except AudioError as exc:
        unreadable = "not an audio file showkit can read"
        if exc.what.startswith(unreadable):
            what = f"cannot read the {role}" + exc.what[len(unreadable):]
        elif "audio file" in exc.what:
            what = exc.what.replace("an audio file", f"a {role} file").replace("audio file", f"{role} file")
        else:
            what = f"the {role}: {exc.what}"
        raise AudioError(what, exc.where, exc.fix) from None
    if info.frames * info.channels > MAX_CUE_SAMPLES:
        raise AudioError(f"the {role} is {info.duration_s:.0f} s x {info.channels} channels, more than "
                         f"showkit holds in memory ({MAX_CUE_SAMPLES} samples)", str(path),
                         "record a shorter take (a sweep of 5 to 30 s)")
    try:
        data, rate = sf.read(str(info.path), dtype="float64", always_2d=False)
    except Exception as exc:  # noqa: BLE001 - libsndfile errors vary
        raise AudioError(f"cannot read the {role} ({_short(exc)})", str(path), "give a WAV or FLAC file") from None
    return data, int(rate)


def samples_hash(samples: np.ndarray, rate_hz: int) -> str:
    """SHA-256 (hex, 16 characters) of samples and their rate, for generated sources."""
    digest = hashlib.sha256(np.ascontiguousarray(samples, dtype=np.float32).tobytes())
    digest.update(str(int(rate_hz)).encode())
    return digest.hexdigest()[:16]
