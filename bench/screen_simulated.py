#!/usr/bin/python3
"""The screen reader on the simulator's scanners: frames drawn by another
renderer (FreeType in `mitilog simulate --screens`, its own screen designs,
text in boxes over the picture, JPEG baseline, JPEG-LS and RLE), read from
the DICOM files through the shim's frame decoder.

For each simulated device (manifest.csv's `device`: identity and software
version), a profile is learned from the fewest of its images whose values
show every digit and the point (at most 12), with the values typed from
the manifest's drawn text, as an administrator would; every other image
of the device is read (its first frame). The scanner whose software update
moved its text is also read with the profile of its old version: nothing
may be read there. Reports, per device: values drawn, read exactly, read
wrong; and the most common reasons for "not read".

    bench/screen_simulated.py [--days N] [--tiny] [--keep DIR]

Needs a mitilog built with the simulator's --screens, unless DIR already
holds a simulated set (its manifest.csv).
"""
import argparse
import collections
import csv
import os
import re
import shutil
import subprocess
import sys
import tempfile

HERE = os.path.dirname(os.path.abspath(__file__))
sys.path.insert(0, HERE)
from benchlib import mitilog_binary  # noqa: E402

NAMES = ["mi", "tis", "tib", "tic"]


def truth(row):
    values = {}
    for name in NAMES:
        text = row.get(name + "_text") or ""
        match = re.search(r"([0-9]+\.[0-9]+)$", text)
        if match:
            values[name] = match.group(1)
    return values


def main():
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--days", type=int, default=4)
    parser.add_argument("--tiny", action="store_true", help="one day")
    parser.add_argument("--keep", help="simulate into this folder and keep it")
    options = parser.parse_args()
    binary = mitilog_binary()
    folder = options.keep or tempfile.mkdtemp(prefix="mitilog-screen-sim-")
    try:
        if not os.path.exists(os.path.join(folder, "manifest.csv")):
            help_text = subprocess.run([binary, "simulate", "--help"], capture_output=True,
                                       text=True).stdout
            if "--screens" not in help_text:
                print("this mitilog's simulator has no --screens: nothing to measure")
                return 0
            subprocess.run([binary, "simulate", "--out", folder, "--screens", "--compress",
                            "--days", "1" if options.tiny else str(options.days)],
                           check=True, capture_output=True)
        rows = list(csv.DictReader(open(os.path.join(folder, "manifest.csv"))))
        by_device = collections.defaultdict(list)
        for row in rows:
            if row.get("device") and truth(row):
                by_device[row["device"]].append(row)
        lines, old_profile = [], None
        for device, device_rows in sorted(by_device.items()):
            chosen, seen = [], set()
            while seen < set("0123456789.") and len(chosen) < 12:
                best = max(device_rows,
                           key=lambda r: len(set("".join(truth(r).values())) - seen))
                if not set("".join(truth(best).values())) - seen:
                    break
                chosen.append(best)
                seen |= set("".join(truth(best).values()))
            learn = ["learn %s %s %s" % (device, os.path.join(folder, r["path"]),
                                         ",".join("%s=%s" % (k.upper(), v)
                                                  for k, v in truth(r).items()))
                     for r in chosen]
            lines += learn
            lines += ["read %s %s" % (device, os.path.join(folder, r["path"]))
                      for r in device_rows if r not in chosen]
            if old_profile is None and device.endswith("-4.0.2"):
                old_profile = (device, learn)
        if old_profile is not None:
            updated = old_profile[0][:-len("4.0.2")] + "4.1.0"
            key = "old-profile-on-updated-screen"
            lines += [line.replace(old_profile[0], key, 1) for line in old_profile[1]]
            lines += ["read %s %s" % (key, os.path.join(folder, r["path"]))
                      for r in by_device.get(updated, [])]
        manifest = os.path.join(folder, "screen-bench.txt")
        with open(manifest, "w") as out:
            out.write("\n".join(lines) + "\n")
        output = subprocess.run([binary, "device", "bench", manifest], capture_output=True,
                                text=True).stdout
        drawn_by_path = {os.path.join(folder, r["path"]): truth(r) for r in rows}
        stats = collections.defaultdict(lambda: [0, 0, 0])
        reasons = collections.Counter()
        key, path = None, None
        cpu = 0.0
        set_up = set()
        for line in output.splitlines():
            parts = line.split()
            if line.startswith("learned"):
                print(line)
                key = parts[1]
                if parts[2] == "ok":
                    set_up.add(key)
            elif parts and parts[0] == "frames_read":
                cpu = float(parts[3])
            elif parts and parts[0] == "read" and parts[1] in drawn_by_path:
                path = parts[1]
                got = dict(p.split("=", 1) for p in parts[2:] if "=" in p)
                for index, text in drawn_by_path[path].items():
                    stat = stats[key]
                    stat[0] += 1
                    value = got.get(index, "-")
                    if value == text:
                        stat[1] += 1
                    elif value != "-":
                        stat[2] += 1
                        print("WRONG %s %s drawn %s read %s" % (path, index, text, value))
            elif line.startswith("  ") and "not read:" in line and path is not None:
                index = parts[0]
                if index in drawn_by_path[path]:
                    reasons[(key, line.split("not read:", 1)[1].strip())] += 1
        print("%-32s %6s %6s %6s" % ("device", "drawn", "read", "wrong"))
        total = [0, 0, 0]
        for device in sorted(stats):
            d, r, w = stats[device]
            print("%-32s %6d %6d %6d" % (device, d, r, w))
            if device in set_up and not device.startswith("old-profile"):
                total = [total[0] + d, total[1] + r, total[2] + w]
        for (device, reason), number in reasons.most_common(8):
            print("not read %5d %s: %s" % (number, device, reason))
        wrong_anywhere = sum(stat[2] for stat in stats.values())
        print("devices set up: values drawn %d, read %d (%.2f %%), wrong %d; wrong on any "
              "device %d; CPU %.3f ms per frame"
              % (total[0], total[1], 100.0 * total[1] / max(total[0], 1), total[2],
                 wrong_anywhere, cpu))
        return 0
    finally:
        if not options.keep:
            shutil.rmtree(folder, ignore_errors=True)


if __name__ == "__main__":
    sys.exit(main())
