"""showkit: plan, check and run flame-tube science shows.

Layers, one way: ``physics`` -> ``analysis`` -> ``show`` -> ``cli`` / ``ui``.
"""

__version__ = "0.1.0"

#: Bumped whenever a change to the model or the analysis changes results:
#: cached analyses and cue locks made with another version are stale.
ANALYSIS_VERSION = 8  # 3: locks of cues not at 48 kHz also hold at 48 kHz; 4: loss family, flowing-gas holes; 5: multi-pitch scan; 6: a transposition must reach a readable score; 7: passages from timbre, harmony, rhythm and sustain novelty; 8: the scan's short-time spectra by scipy.fft (maps differ in float rounding)
