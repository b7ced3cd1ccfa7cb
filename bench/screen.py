#!/usr/bin/python3
"""Reading the indices burned into the pixels: wrong values, read rate and
CPU per frame of the screen reader (src/screen/) on a generated set.

Frames come from tests/fixtures/screens.py: several invented screen
designs (fonts from Debian's packages, 10-18 px, colours, positions,
label variants "MI 1.2", "MI:1.2", "TIs 0.4", "TIb0.85", one and two
decimals, decoy text such as "1.9MHz", "Gn 52", "D 16cm", dates), half
JPEG-compressed (quality 70-95), half not. A profile is learned per design
from two labelled frames (`mitilog device bench`), then every other
frame is read. The values drawn are the truth:

  wrong      a value reported that differs from the one drawn (goal 0)
  read rate  values reported / values drawn (goal >= 99 %)
  CPU        getrusage around screen_read() only, per frame (goal <= 5 ms;
             the frame is already decoded, as a PGM file here)

    bench/screen.py [--frames N] [--tiny] [--keep DIR]
"""
import argparse
import os
import random
import shutil
import subprocess
import sys
import tempfile

HERE = os.path.dirname(os.path.abspath(__file__))
sys.path.insert(0, os.path.join(os.path.dirname(HERE), "tests", "fixtures"))
sys.path.insert(0, HERE)

import screens  # noqa: E402
from benchlib import mitilog_binary  # noqa: E402


def generate(directory, frames, seed):
    rng = random.Random(seed)
    lines, truth = [], {}
    names = sorted(screens.DESIGNS)
    per_design = max(1, frames // len(names))
    for name in names:
        design = screens.DESIGNS[name]
        for path, values in screens.learning_frames(name, design, rng, directory):
            lines.append("learn %s %s %s" % (name, path,
                                             screens.labels_of(values, design["decimals"])))
        for number in range(per_design):
            values = screens.random_values(design, rng)
            quality = rng.choice([70, 80, 90, 95]) if number % 2 else None
            path = os.path.join(directory, "%s-%05d.pgm" % (name, number))
            screens.write_pgm(screens.render(design, values, rng, jpeg_quality=quality), path)
            lines.append("read %s %s" % (name, path))
            truth[path] = (name, quality, {k.lower(): screens.format_value(v, design["decimals"])
                                           for k, v in values.items()})
    manifest = os.path.join(directory, "manifest.txt")
    with open(manifest, "w") as out:
        out.write("\n".join(lines) + "\n")
    return manifest, truth


def main():
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--frames", type=int, default=2000)
    parser.add_argument("--tiny", action="store_true", help="a few frames per design")
    parser.add_argument("--seed", type=int, default=2026)
    parser.add_argument("--keep", help="write the frames here and keep them")
    options = parser.parse_args()
    frames = 24 if options.tiny else options.frames
    directory = options.keep or tempfile.mkdtemp(prefix="mitilog-screen-")
    os.makedirs(directory, exist_ok=True)
    try:
        manifest, truth = generate(directory, frames, options.seed)
        result = subprocess.run([mitilog_binary(), "device", "bench", manifest],
                                capture_output=True, text=True)
        if result.returncode != 0:
            sys.stderr.write(result.stderr)
            return 1
        drawn = read = wrong = 0
        by_design = {}
        reasons = {}
        cpu = None
        for line in result.stdout.splitlines():
            parts = line.split()
            if line.startswith("learned"):
                print(line)
            elif parts and parts[0] == "frames_read":
                cpu = float(parts[3])
            elif parts and parts[0] == "read" and parts[1] in truth:
                name, quality, values = truth[parts[1]]
                got = dict(p.split("=", 1) for p in parts[2:] if "=" in p)
                stats = by_design.setdefault(name, [0, 0, 0])
                for index, text in values.items():
                    drawn += 1
                    stats[0] += 1
                    value = got.get(index, "-")
                    if value == "-":
                        continue
                    if value == text:
                        read += 1
                        stats[1] += 1
                    else:
                        wrong += 1
                        stats[2] += 1
                        print("WRONG %s %s drawn %s read %s" % (parts[1], index, text, value))
            elif line.startswith("  ") and "not read:" in line:
                reason = line.split("not read:", 1)[1].strip()
                reasons[reason] = reasons.get(reason, 0) + 1
        print("%-8s %6s %6s %6s" % ("design", "drawn", "read", "wrong"))
        for name in sorted(by_design):
            d, r, w = by_design[name]
            print("%-8s %6d %6d %6d" % (name, d, r, w))
        for reason, number in sorted(reasons.items(), key=lambda item: -item[1])[:8]:
            print("not read %5d: %s" % (number, reason))
        rate = 100.0 * read / drawn if drawn else 0.0
        print("frames %d, values drawn %d, read %d (%.2f %%), wrong %d, CPU %.3f ms per frame"
              % (len(truth), drawn, read, rate, wrong, cpu or 0.0))
        return 0
    finally:
        if not options.keep:
            shutil.rmtree(directory, ignore_errors=True)


if __name__ == "__main__":
    sys.exit(main())
