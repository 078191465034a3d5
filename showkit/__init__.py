"""showkit: plan, check and run flame-tube science shows.

Layers, one way: ``physics`` -> ``analysis`` -> ``show`` -> ``cli`` / ``ui``.
"""

__version__ = "0.1.0"

#: Bumped whenever a change to the tube model or the level analysis a lock derives (hole
#: pressure, ceilings) changes results: cue locks and cached analyses made with another
#: version are stale.
ANALYSIS_VERSION = 9  # 3: locks of cues not at 48 kHz also hold at 48 kHz; 4: loss family, flowing-gas holes; 5: multi-pitch scan; 6: a transposition must reach a readable score; 7: passages from timbre, harmony, rhythm and sustain novelty; 8: the scan's short-time spectra by scipy.fft (maps differ in float rounding); 9: the loss family's members searched on a grid geometric near still gas (a member the bisection missed stood 0.23 dB above the chosen ones)
#: Bumped when a change to the music scan alone (notes, map, passages, scores, suggestions)
#: changes its results: cached scans made with another version are analysed again, cue locks
#: are untouched (a lock never reads the scan).  Before it existed, scan changes bumped
#: ANALYSIS_VERSION (5-8 above), which made every lock stale.
SCAN_VERSION = 4  # 2: a passage lists every mode held in it, not only those held 5 % of its time; 3: the scan's spectra without each frame's DC (a file of pure DC drew notes); 4: a hold whose level falls faster than 60 dB/s is not held
