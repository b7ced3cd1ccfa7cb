#!/usr/bin/python3
"""What reading the pixels costs: CPU per object of `mitilog import` with
an active screen profile (every object decoded and read) against the same
import with none (nothing read), per transfer syntax, side by side.

Usage: bench/reading.py [--objects N] [--runs R] [--size COLUMNSxROWS] [--tiny]

Screens are rendered by tests/fixtures/make_screens.py (640x480 by
default), compressed by DCMTK's dcmcjpeg / dcmcrle / dcmcjpls (JPEG 2000 by
Pillow's OpenJPEG). CPU is the user + system time of the import process
(os.wait4), the median of R runs; the difference of the two columns is
what decoding, reading and writing the readings add per object.
"""

import argparse
import os
import shutil
import sqlite3
import statistics
import subprocess
import sys
import tempfile

REPO = os.path.abspath(os.path.join(os.path.dirname(__file__), ".."))
sys.path.insert(0, os.path.join(REPO, "tests", "fixtures"))
import make_screens  # noqa: E402

BINARY = os.environ.get("MITILOG", os.path.join(REPO, "build", "mitilog"))
SYNTAXES = {
    "native": None,
    "jpeg_baseline": ["dcmcjpeg", "+eb"],
    "rle": ["dcmcrle"],
    "jpegls": ["dcmcjpls", "+el"],
    "jpeg2000": "openjpeg",
}


def cpu_of(command):
    process = subprocess.Popen(command, stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL)
    _, status, usage = os.wait4(process.pid, 0)
    assert os.waitstatus_to_exitcode(status) == 0, command
    return usage.ru_utime + usage.ru_stime


def config_for(folder):
    os.makedirs(os.path.join(folder, "var"), exist_ok=True)
    path = os.path.join(folder, "mitilog.ini")
    with open(path, "w") as f:
        f.write("[storage]\ndata_directory = var\nretention = header\n")
    return path


def learn(config, folder, rows, columns):
    command = [BINARY, "device", "learn", "--config", config, "--key", "bench"]
    frames = []
    for name, values in make_screens.LEARNING.items():
        dicom = os.path.join(folder, name + ".dcm")
        make_screens.write(make_screens.make_screen(name, "pixels_only", values, rows=rows,
                                                    columns=columns), dicom)
        pgm = os.path.join(folder, name + ".pgm")
        subprocess.run([BINARY, "frame", "--output", pgm, dicom], check=True,
                       stdout=subprocess.DEVNULL)
        command += ["--value", "%s:%s" % (pgm, ",".join(
            "%s=%s" % (k.upper(), v) for k, v in values.items()))]
        frames.append(pgm)
    subprocess.run(command + frames, check=True, stdout=subprocess.DEVNULL,
                   stderr=subprocess.DEVNULL)
    subprocess.run([BINARY, "device", "activate", "--config", config, "bench"], check=True,
                   stdout=subprocess.DEVNULL)


def main():
    parser = argparse.ArgumentParser()
    parser.add_argument("--objects", type=int, default=100)
    parser.add_argument("--runs", type=int, default=3)
    parser.add_argument("--size", default="640x480")
    parser.add_argument("--tiny", action="store_true", help="3 objects, 1 run (CI)")
    args = parser.parse_args()
    if args.tiny:
        args.objects, args.runs = 3, 1
    columns, rows = (int(x) for x in args.size.split("x"))
    work = tempfile.mkdtemp(prefix="mitilog-bench-reading-")
    try:
        sets = {}
        for syntax, command in SYNTAXES.items():
            folder = os.path.join(work, "files", syntax)
            os.makedirs(folder)
            for i in range(args.objects):
                values = dict(mi="%d.%d" % (i % 2, i % 10), tis="0.%d" % (i % 10),
                              tib="1.%d" % ((i * 3) % 10))
                native = os.path.join(folder, "n%04d.dcm" % i)
                make_screens.write(make_screens.make_screen(
                    "bench-%s-%d" % (syntax, i), "pixels_only", values, rows=rows,
                    columns=columns, study="bench-" + syntax), native)
                if command is None:
                    continue
                out = os.path.join(folder, "c%04d.dcm" % i)
                if command == "openjpeg":
                    make_screens.write_jpeg2000(native, out)
                else:
                    subprocess.run(command + [native, out], check=True)
                os.remove(native)
            sets[syntax] = folder
        print("objects of %dx%d, %d per set, median of %d runs; CPU s per object"
              % (columns, rows, args.objects, args.runs))
        print("%-14s %12s %12s %12s %8s" % ("syntax", "no profile", "reading", "difference",
                                             "read"))
        for syntax, folder in sets.items():
            results = {}
            for mode in ("none", "profile"):
                times = []
                for run in range(args.runs):
                    place = os.path.join(work, "run-%s-%s-%d" % (syntax, mode, run))
                    os.makedirs(place)
                    config = config_for(place)
                    if mode == "profile":
                        learn(config, place, rows, columns)
                    times.append(cpu_of([BINARY, "import", "--config", config, folder]))
                    if mode == "profile":
                        db = sqlite3.connect(os.path.join(place, "var", "mitilog.sqlite3"))
                        read = db.execute("SELECT count(*) FROM screen_readings "
                                          "WHERE state = 'read'").fetchone()[0]
                        db.close()
                        results["read"] = read
                    shutil.rmtree(place)
                results[mode] = statistics.median(times) / args.objects
            # a run that did not read every object measures nothing
            assert results["read"] == args.objects, (syntax, results["read"])
            print("%-14s %12.5f %12.5f %12.5f %4d/%-3d" % (
                syntax, results["none"], results["profile"], results["profile"] - results["none"],
                results["read"], args.objects))
    finally:
        shutil.rmtree(work, ignore_errors=True)
    return 0


if __name__ == "__main__":
    sys.exit(main())
