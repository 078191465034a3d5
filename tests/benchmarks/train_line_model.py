"""Train the top-line network of ``showkit/analysis/topline.py`` (run by hand; needs torch).

    python tests/benchmarks/train_line_model.py render FOLDER [--pieces N] [--seed S] [--soundfont SF2|synth ...]
    python tests/benchmarks/train_line_model.py train FOLDER... [--epochs N] [--stride K] [--out FILE.npz]

The shipped weights (``showkit/data/topline_weights.npz``) were made with (torch 2.13 CPU, in a
venv of its own; Debian's fluidsynth, timgm6mb-soundfont and csound-soundfont)::

    python tests/benchmarks/train_line_model.py render /tmp/lt_data --pieces 240
    python tests/benchmarks/train_line_model.py render /tmp/lt_synth --pieces 220 --seed 4 --soundfont synth
    python tests/benchmarks/train_line_model.py train /tmp/lt_data /tmp/lt_synth --epochs 4 --stride 2

``render`` takes public-domain scores from music21's corpus -- none of the
real-music test set's or the unseen set's pieces (``tests/realmusic.PIECES``,
``tests/benchmarks/eval_scan_unseen.UNSEEN``) -- gives each a texture of
General MIDI programs at random (organ, piano, strings, a melody instrument over
an accompaniment, winds, choir), a random tempo, and renders 30 s with fluidsynth
through soundfonts other than the test set's FluidR3 (TimGM6mb, the csound GM
bank), so the test measures the network on instruments it never heard.  The
label of a frame is the highest sounding MIDI note (the melody reference of the
tests).  ``synth`` in place of a soundfont synthesizes the notes with invented
harmonic timbres (:func:`_timbre`), so the network does not learn one sound set's
instruments.  ``train`` fits the network with torch on CPU (cross-entropy over the
output bins, the target spread over the note's three bins) and writes the
weights as numpy arrays; inference in showkit is numpy only.

The shipped weights' data was made when ``topline.cqt_db`` was librosa's ``vqt`` with
its per-excerpt tuning estimate; it is now showkit's own constant-Q transform at
A440 (``showkit/analysis/constantq.py``, equal to ``librosa.vqt(tuning=0)`` within
0.01 dB), so the commands above now give features that differ by that tuning
estimate (0 to 15 c on the test set's renders, measured) and slightly different weights; read
either way, the shipped weights score the same on both evaluation sets.
"""

from __future__ import annotations

import argparse
import os
import random
import sys
from pathlib import Path

import numpy as np

HERE = Path(__file__).resolve()
sys.path.insert(0, str(HERE.parents[1]))
sys.path.insert(0, str(HERE.parents[2]))

SOUNDFONTS = (Path("/usr/share/sounds/sf2/TimGM6mb.sf2"), Path("/usr/share/sounds/sf2/sf_GMbank.sf2"))
SECONDS = 30.0
FRAME_RATE_HZ = 30.0

TEXTURES = {
    "organ": lambda r, n: [r.choice((19, 19, 20, 16, 17))] * n,
    "piano": lambda r, n: [r.choice((0, 0, 1, 2))] * n,
    "strings": lambda r, n: ([40, 40, 41, 42] + [42] * 8)[:n] if r.random() < 0.6 else [r.choice((48, 49))] * n,
    "melody": lambda r, n: [r.choice((73, 40, 68, 71, 56, 53, 74, 65))] + [r.choice((0, 48, 19, 24))] * (n - 1),
    "winds": lambda r, n: ([73, 68, 71, 70] + [70] * 8)[:n],
    "choir": lambda r, n: [52] * n,
}


def _excluded() -> set:
    import realmusic as rm
    from benchmarks import eval_scan_unseen as un  # noqa: F401  (tests/ on the path)

    out = {p.corpus for p in rm.PIECES} | {p.corpus for p in un.UNSEEN}
    return out | {"haydn/opus74no1"}


def _choose(n_pieces: int, seed: int) -> list[str]:
    from music21 import corpus

    bad = _excluded()
    paths = [str(p).split("/corpus/")[1] for p in corpus.getPaths()]
    names = sorted({p.rsplit(".", 1)[0] for p in paths})
    names = [n for n in names if not any(n.startswith(b) or b.startswith(n) for b in bad)]
    pools = {"bach/bwv": 0.45, "palestrina": 0.08, "monteverdi": 0.07, "beethoven": 0.08, "mozart": 0.05,
             "haydn": 0.04, "ryansMammoth": 0.1, "trecento": 0.04, "josquin": 0.02, "schumann": 0.03,
             "oneills1850": 0.04}
    r = random.Random(seed)
    out = []
    for prefix, share in pools.items():
        cand = [n for n in names if n.startswith(prefix)]
        r.shuffle(cand)
        out += cand[:max(1, round(share * n_pieces))]
    return out


def _timbre(r: random.Random, organ: bool = False) -> dict:
    """A random harmonic timbre: partial levels, envelope, vibrato (an invented instrument).

    ``organ``: always the organ's ranks, and the fundamental 0-10 dB under the partials'
    strongest on top (a principal chorus with mixtures and mutations, where the 2nd to 5th
    partials reach or pass the fundamental; common practice, no source).
    """
    nh = r.randint(8, 20)
    tilt = r.uniform(0.4, 2.0)
    db = [-20.0 * tilt * np.log10(h) + r.gauss(0.0, 4.0) for h in range(1, nh + 1)]
    kind = r.random() * (0.3 if organ else 1.0)
    if kind < 0.3:            # an organ's ranks: octaves (4', 2') and mutations (2 2/3', 1 3/5')
        for h in r.sample((2, 3, 4, 5, 6, 8), r.randint(1, 4)):
            if h <= nh:
                db[h - 1] += r.uniform(0.0, 12.0) + 20.0 * tilt * np.log10(h) * r.random()
    elif kind < 0.45:         # odd partials strong (a stopped pipe, a clarinet)
        for h in range(2, nh + 1, 2):
            db[h - 1] -= r.uniform(6.0, 20.0)
    if organ:
        db[0] = max(db[1:5]) - r.uniform(0.0, 10.0)
    return {"amp": 10.0 ** (np.array(db) / 20.0), "attack": r.uniform(0.005, 0.08),
            "decay": r.choice((None, r.uniform(0.3, 3.0))), "release": r.uniform(0.03, 0.2),
            "vibrato": r.uniform(0.0, 25.0) if r.random() < 0.35 else 0.0, "rate": r.uniform(4.5, 6.5)}


def _synth(notes, seconds: float, rate: int, r: random.Random, organ: bool = False) -> np.ndarray:
    """Additive synthesis of ``[(program, midi, on, off, vel)]``, one random timbre per program
    (``organ``: organ timbres only, :func:`_timbre`)."""
    timbres: dict = {}
    out = np.zeros(int(seconds * rate) + rate, dtype=np.float64)
    for program, midi, on, off, vel in notes:
        tb = timbres.setdefault(program, _timbre(r, organ))
        f0 = 440.0 * 2.0 ** ((midi - 69) / 12.0)
        dur = off - on + tb["release"]
        t = np.arange(int(dur * rate)) / rate
        env = np.minimum(1.0, t / tb["attack"])
        if tb["decay"] is not None:
            env = env * np.exp(-t / tb["decay"])
        env = env * np.clip((dur - t) / tb["release"], 0.0, 1.0)
        bend = 2.0 ** (tb["vibrato"] / 1200.0 * np.sin(2 * np.pi * tb["rate"] * t))
        phase = 2 * np.pi * np.cumsum(f0 * bend) / rate
        h = np.arange(1, tb["amp"].size + 1)
        ok = h * f0 < 0.45 * rate
        y = np.sin(phase[:, None] * h[None, ok] + r.uniform(0, 6.28)) @ tb["amp"][ok]
        i = int(on * rate)
        out[i:i + y.size] += (vel / 100.0) * env[: out.size - i] * y[: out.size - i]
    return out[: int(seconds * rate)].astype(np.float32)


def _render_one(args) -> str | None:
    name, k, folder, fonts = args
    import realmusic as rm
    from showkit.analysis import topline

    r = random.Random(k)
    out = Path(folder) / f"{k:04d}.npz"
    if out.exists():
        return None
    try:
        from music21 import corpus

        score = corpus.parse(name)
        parts = len(score.parts) or 1
    except Exception as exc:  # noqa: BLE001 -- a corpus file music21 cannot read is skipped
        return f"{name}: {exc}"
    texture = r.choice(list(TEXTURES)) if parts > 1 else "melody"
    programs = tuple(TEXTURES[texture](r, max(parts, 1)))
    vel = tuple([r.randint(80, 110)] + [r.randint(50, 95)] * (parts - 1))
    piece = rm.Piece(f"t{k}", name, r.uniform(50.0, 130.0), SECONDS, programs, texture, vel)
    try:
        notes = rm.score_notes(piece)
    except Exception as exc:  # noqa: BLE001
        return f"{name}: {exc}"
    notes = [n for n in notes if 36 <= n[1] <= 96]
    if len(notes) < 10:
        return f"{name}: too few notes"
    font = fonts[k % len(fonts)]
    if font in ("synth", "synth-organ"):
        x = _synth(notes, SECONDS, rm.RATE_HZ, r, organ=font == "synth-organ")
    else:
        rm.SOUNDFONT = Path(font)
        x = rm._render(notes, SECONDS, Path(folder) / f"{k:04d}.wav")
    peak = float(np.max(np.abs(x)))
    if peak <= 0:
        return f"{name}: silent"
    x = x / peak * 10.0 ** (r.uniform(-20.0, -1.0) / 20.0)
    times = np.arange(int(SECONDS * FRAME_RATE_HZ)) / FRAME_RATE_HZ
    on = np.array([n[2] for n in notes])
    off = np.array([n[3] for n in notes])
    midi = np.array([n[1] for n in notes], dtype=float)
    sounding = (times[:, None] >= on[None, :]) & (times[:, None] < off[None, :])
    top = np.where(sounding, midi[None, :], -1.0).max(axis=1)
    db = topline.cqt_db(x, rm.RATE_HZ)
    np.savez_compressed(out, db=db.astype(np.float16), top=top, times=times, name=name, texture=texture,
                        soundfont=Path(font).name)
    return None


def render(folder: Path, n_pieces: int, seed: int = 1, fonts=SOUNDFONTS) -> None:
    from multiprocessing import Pool

    folder.mkdir(parents=True, exist_ok=True)
    names = _choose(n_pieces, seed)
    first = 0 if seed == 1 else 1000 * seed      # seed 1 numbers its pieces from 0 (the shipped weights' data)
    jobs = [(n, first + k, str(folder), [str(f) for f in fonts]) for k, n in enumerate(names)]
    with Pool(os.cpu_count() or 1) as pool:
        for msg in pool.imap_unordered(_render_one, jobs):
            if msg:
                print("skipped", msg, flush=True)
    print(len(list(folder.glob("*.npz"))), "pieces in", folder)


def _dataset(folders):
    """All pieces' constant-Q frames in one array, and per labelled frame: row, piece bounds, label."""
    from showkit.analysis import topline

    dbs, idx, lo, hi, ys = [], [], [], [], []
    start = 0
    top_midi = topline.OUT_LOW_MIDI + topline.OUT_BINS * 12 // topline.BINS_PER_OCTAVE
    for f in sorted(f for folder in folders for f in Path(folder).glob("*.npz")):
        with np.load(f) as z:
            db = z["db"]
            top, times = z["top"], z["times"]
        keep = (top >= topline.OUT_LOW_MIDI) & (top < top_midi)
        if not keep.any():
            continue
        n = db.shape[0]
        rows = np.clip(np.rint(times[keep] * topline.LINE_RATE_HZ / topline.LINE_HOP).astype(int), 0, n - 1)
        dbs.append(db)
        idx.append(start + rows)
        lo.append(np.full(rows.size, start))
        hi.append(np.full(rows.size, start + n - 1))
        ys.append(np.rint((top[keep] - topline.OUT_LOW_MIDI) * topline.BINS_PER_OCTAVE / 12).astype(np.int64))
        start += n
    return (np.concatenate(dbs), np.concatenate(idx), np.concatenate(lo), np.concatenate(hi),
            np.concatenate(ys))


#: The network: (kernel, dilation) of each hidden layer along log frequency (36 bins: an octave).
ARCH = ((5, 1), (5, 1), (3, 36), (3, 12), (3, 36), (9, 1))
WIDTH = 32


def build_net(torch, cin: int):
    nn = torch.nn
    layers, c = [], cin
    for k, d in ARCH:
        layers += [nn.Conv1d(c, WIDTH, k, padding=d * (k - 1) // 2, dilation=d), nn.ReLU()]
        c = WIDTH
    return nn.Sequential(*layers, nn.Conv1d(c, 1, 1))


def train(folders, epochs: int, out: Path, seed: int = 0, stride: int = 1) -> None:
    import torch

    torch.manual_seed(seed)
    from showkit.analysis import topline

    db, rows, lo, hi, y = _dataset(folders)
    rows, lo, hi, y = rows[::stride], lo[::stride], hi[::stride], y[::stride]
    print("frames", rows.size, "of", db.shape, flush=True)

    def batch(b):
        return torch.from_numpy(topline.gather_input(db, rows[b], lo[b], hi[b]))

    piece = np.unique(lo, return_inverse=True)[1]
    val = np.nonzero(piece % 10 == 0)[0]          # whole pieces held out
    tr = np.nonzero(piece % 10 != 0)[0]
    net = build_net(torch, len(topline.CONTEXT) * len(topline.HARMONICS))
    opt = torch.optim.Adam(net.parameters(), lr=2e-3)
    sched = torch.optim.lr_scheduler.CosineAnnealingLR(opt, epochs)
    bins = topline.OUT_BINS

    def target(yb):
        t = torch.zeros((yb.shape[0], bins))
        for d, w in ((-1, 0.25), (0, 0.5), (1, 0.25)):
            t[torch.arange(yb.shape[0]), (yb + d).clamp(0, bins - 1)] += w
        return t

    torch.set_num_threads(os.cpu_count() or 1)
    yt = torch.from_numpy(y)
    for ep in range(epochs):
        net.train()
        perm = np.random.default_rng(ep).permutation(tr)
        tot = 0.0
        for s in range(0, perm.size, 256):
            b = perm[s:s + 256]
            logits = net(batch(b))[:, 0, :]
            loss = -(target(yt[b]) * torch.log_softmax(logits, dim=1)).sum(1).mean()
            opt.zero_grad()
            loss.backward()
            opt.step()
            tot += float(loss.detach()) * b.size
        sched.step()
        net.eval()
        with torch.no_grad():
            pred = torch.cat([net(batch(val[s:s + 1024]))[:, 0, :].argmax(1) for s in range(0, val.size, 1024)])
            acc = float(((pred - yt[torch.from_numpy(val)]).abs() <= 1).float().mean())
        print(f"epoch {ep + 1}: loss {tot / tr.size:.3f} val frame accuracy (+-1 bin) {acc:.3f}", flush=True)
    convs = [m for m in net if isinstance(m, torch.nn.Conv1d)]
    arrays = {"layers": np.array(len(convs)), "context": np.array(topline.CONTEXT)}
    for i, c in enumerate(convs):
        arrays[f"w{i}"] = c.weight.detach().numpy().astype(np.float32)
        arrays[f"b{i}"] = c.bias.detach().numpy().astype(np.float32)
        arrays[f"d{i}"] = np.array(c.dilation[0])
    np.savez(out, **arrays)
    print("wrote", out)


def main() -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    sub = ap.add_subparsers(dest="cmd", required=True)
    r = sub.add_parser("render")
    r.add_argument("folder", type=Path)
    r.add_argument("--pieces", type=int, default=160)
    r.add_argument("--seed", type=int, default=1)
    r.add_argument("--soundfont", action="append", help="a .sf2 file, 'synth' (additive, random timbres) or 'synth-organ' (organ timbres only)")
    t = sub.add_parser("train")
    t.add_argument("folder", type=Path, nargs="+")
    t.add_argument("--epochs", type=int, default=12)
    t.add_argument("--stride", type=int, default=1, help="keep every k-th labelled frame")
    t.add_argument("--out", type=Path, default=HERE.parents[2] / "showkit" / "data" / "topline_weights.npz")
    a = ap.parse_args()
    if a.cmd == "render":
        render(a.folder, a.pieces, a.seed, tuple(a.soundfont or SOUNDFONTS))
    else:
        train(a.folder, a.epochs, a.out, stride=a.stride)
    return 0


if __name__ == "__main__":
    sys.exit(main())
