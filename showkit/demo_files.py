"""Where the bundled demo lives: the demo rig, the demo show and the demo tracks.

The demo tracks are synthesized by :mod:`showkit.demo.synth` (deterministic).
In a source checkout they are the files in ``demo_audio/``; in an installed
copy they are made once into the user's cache folder.  The demo show is copied
to the user's data folder before it is opened, so that edits never touch the
installed package.
"""

from __future__ import annotations

from importlib import resources
from pathlib import Path

from showkit import __version__
from showkit.errors import ShowkitError
from showkit.folders import cache_dir, data_dir
from showkit.safesave import write_bytes, write_text



def _repo_demo_audio() -> Path:
    return Path(__file__).resolve().parent.parent / "demo_audio"


def demo_audio_folder() -> Path:
    """A folder holding the demo tracks, made if need be."""
    repo = _repo_demo_audio()
    if repo.is_dir() and any(repo.glob("*.flac")):
        return repo
    folder = cache_dir() / f"demo_audio-{__version__}"
    marker = folder / ".complete"
    if not marker.exists():
        try:
            from showkit.demo.synth import write_demo_audio
        except ImportError as exc:  # pragma: no cover - only in a broken install
            raise ShowkitError("the demo tracks are missing", str(folder), f"reinstall showkit ({exc})") from None
        folder.mkdir(parents=True, exist_ok=True)
        write_demo_audio(folder)
        write_text(marker, "ok\n", backups=0, what="marker")
    return folder


def demo_audio_path(name: str) -> Path:
    """Path of one demo track by file name."""
    return demo_audio_folder() / name


def bundled_demo_show() -> Path:
    return Path(str(resources.files("showkit") / "data" / "demo_show.toml"))


def user_demo_show() -> Path:
    """The user's own copy of the demo show (made from the bundled one the first time)."""
    target = data_dir() / "demo-show.toml"
    if not target.exists():
        target.parent.mkdir(parents=True, exist_ok=True)
        write_bytes(target, bundled_demo_show().read_bytes(), backups=0, what="demo show")
    return target


#: The demo tracks by file name, as a sheet names them after ``demo:`` (made by
#: :mod:`showkit.demo.synth`, one per piece there).
DEMO_TRACKS = ("ember_steps.flac", "lantern_drift.flac", "kettle_parade.flac", "three_rooms.flac")
