"""Every size limit of showkit in one place, each with its reason.

The limits are chosen so that the worst input showkit accepts stays well
under 2 GB of memory, and that nothing it is given can make it wait forever:
files are read only when they are regular files of bounded size, nesting in
TOML and JSON is bounded, and anything showkit generates (tones, glides,
pauses, sweeps) or holds whole in memory (a cue's samples, a recording, a
live show) is bounded in samples.  The README's "Limits" section lists them.
Long tracks are not limited by length: scanning and ceilings stream them
block by block (a 3-hour file works).
"""

from __future__ import annotations

MiB = 1 << 20
GiB = 1 << 30

#: Largest rig file read, bytes: a rig is a few hundred bytes to a few kB (5000 hole positions ~ 100 kB).
RIG_MAX_BYTES = 1 * MiB
#: Largest cue sheet read, bytes: 2000 cues with long notes fit easily (`check` of a
#: 31 MB sheet of 2000 cues peaked at 133 MB, measured).
SHEET_MAX_BYTES = 32 * MiB
#: Largest show log read back, bytes (about 200 000 events).
LOG_MAX_BYTES = 64 * MiB
#: Largest scan-cache entry read, bytes (a track's result is a few kB to a few hundred kB).
CACHE_MAX_BYTES = 16 * MiB
#: Largest audio file read, bytes: audio is streamed, so this bounds the time a read or a
#: content hash takes (about 20 s at disk speed), not memory.  A 3-hour stereo
#: 24-bit 96 kHz WAV is 6.2 GB.
AUDIO_MAX_BYTES = 8 * GiB
#: Deepest nesting of arrays and tables accepted in TOML and JSON (showkit's own files
#: use 3 levels); deeper input would exhaust the parser's recursion.
MAX_NESTING = 32

#: Longest generated cue (tone, glide or pause), s.  A cue is held whole in memory for
#: locking and rendering (float64 at 48 kHz; locking a glide of this length peaked at 1.2 GB, measured).
MAX_GENERATED_S = 15 * 60.0
#: Most samples of one cue held in memory, at the source's own rate (15 min at 48 kHz;
#: 7.5 min at 96 kHz): the same budget for audio passages, sweeps and recordings.
MAX_CUE_SAMPLES = int(MAX_GENERATED_S * 48000)
#: Most cue samples a live run holds in memory (float32), all cues together: 90 minutes at 48 kHz.
MAX_SHOW_SAMPLES = int(90 * 60 * 48000)
#: Highest sample rate of audio read, sweeps written and renders, Hz.
MAX_RATE_HZ = 384_000
#: Lowest sample rate of sweeps written and of audio read, Hz (a flame tube's modes reach a few
#: kHz; a header saying 1 Hz made a 2-s file read as 27 hours, resampled block by block to 48 kHz).
MIN_RATE_HZ = 4_000
#: Shortest audio read, s: a file of a few samples is a broken export, not a passage, cue or
#: measurement (project's floor; a 50-ms file is still read).
MIN_AUDIO_S = 0.02
#: Largest sample magnitude read, times digital full scale (60 dB over it): a float file may
#: run over full scale by some dB in an unfinished mix, never by 60; beyond it the file is
#: damaged or not audio, and squares of its values overflow float32 (1e19 did in the scan).
MAX_SAMPLE_MAGNITUDE = 1000.0
#: Most holes in a rig: real tubes have tens to a few hundred (a 20 m tube with a hole every
#: 10 mm has 2000); the model's cost grows with each.
MAX_HOLES = 2000
#: Longest track a scan (or the UI's Track view) analyses, s.  The scan keeps per-frame
#: analysis of the whole track, linear in its length (one process, peak resident, measured with
#: tests/benchmarks/bench_scan_growth.py: the scan 286 MB, the map 367 MB for 60 min; it was
#: 1.08 GB when this limit was set).  Ceilings stream any length.
MAX_SCAN_S = 90 * 60.0
#: Most cues in one sheet.
MAX_CUES = 2000
#: Largest transposition, cents (either way): the scan searches every shift within it and
#: ``scan --transpose`` accepts any shift it may suggest (3.5 semitones: a move of 300 cents is
#: found from inside the range, not at its edge).
TRANSPOSE_RANGE_CENTS = 350

#: Longest text read as one value with its unit, characters: what presenters write ("6 ft 6 1/2 in",
#: "0.25 inH2O", "1:05.5") is under 20; longer text is a paste slip, refused before it is parsed
#: (64 k spaces took 1.5 s in the unit pattern) and never echoed whole in the error line.
MAX_VALUE_CHARS = 100
#: Longest part (what, where, how to fix) of an error line, characters; a longer one (a quoted
#: file field, a path) keeps its start and end around a count of what was left out.
MAX_MESSAGE_PART_CHARS = 600
