#!/usr/bin/python3
"""Header parse rate: `mitilog import` vs `dcmdump` over the same folder.

Both read every file of the simulated set:
  dcmdump +sd +r FOLDER > /dev/null     one process for all files
  mitilog import FOLDER                 fresh data directory each run,
                                        retention none and header
Files per second, median of the repeats (runs alternate), and the ratio
mitilog/dcmdump. Every import must report "imported N" with N = the number
of files, or the script fails. The page cache is warm for all of them (a
first untimed dcmdump pass reads the files once).

    /usr/bin/python3 bench/parse.py            # full: ~3,800 files
    /usr/bin/python3 bench/parse.py --tiny     # seconds, for CI
"""
import argparse
import json
import os
import re
import subprocess
import sys
import tempfile
import time

sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))
import benchlib  # noqa: E402


def time_dcmdump(folder):
    started = time.monotonic()
    result = subprocess.run(["dcmdump", "-q", "+sd", "+r", folder],
                            stdout=subprocess.DEVNULL, stderr=subprocess.PIPE)
    elapsed = time.monotonic() - started
    if result.returncode != 0:
        raise SystemExit("parse: dcmdump failed:\n%s"
                         % result.stderr.decode(errors="replace")[-2000:])
    return elapsed


def time_import(binary, folder, retention, expected):
    workdir = tempfile.mkdtemp(prefix="mitilog-parse-", dir="/tmp")
    try:
        config = os.path.join(workdir, "mitilog.ini")
        with open(config, "w") as f:
            f.write("[storage]\ndata_directory = %s\nretention = %s\n\n"
                    "[log]\nlevel = warning\n"
                    % (os.path.join(workdir, "var"), retention))
        started = time.monotonic()
        result = subprocess.run([binary, "import", "--config", config,
                                 folder], stdout=subprocess.PIPE,
                                stderr=subprocess.PIPE)
        elapsed = time.monotonic() - started
        out = result.stdout.decode(errors="replace")
        match = re.search(r"imported (\d+), replaced (\d+), rejected (\d+), "
                          r"not stored (\d+)", out)
        if (result.returncode != 0 or match is None or
                int(match.group(1)) != expected):
            raise SystemExit("parse: import (retention %s) invalid: exit %d, "
                             "%s\n%s" % (retention, result.returncode,
                                         out.strip(),
                                         result.stderr.decode(
                                             errors="replace")[-2000:]))
    finally:
        benchlib.remove_later(workdir)
    return elapsed


def main():
    parser = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    parser.add_argument("--days", type=int, default=3)
    parser.add_argument("--seed", type=int, default=1)
    parser.add_argument("--repeats", type=int, default=3)
    parser.add_argument("--tiny", action="store_true",
                        help="1 day, 1 repeat")
    parser.add_argument("--json", default=os.path.join(benchlib.OUT,
                                                       "parse.json"))
    args = parser.parse_args()
    if args.tiny:
        args.days, args.repeats = 1, 1
        args.json = os.path.join(benchlib.OUT, "parse-tiny.json")
    benchlib.require_tools("dcmdump")
    binary = benchlib.mitilog_binary()
    paths, size = benchlib.file_set(binary, args.days, args.seed)
    folder = os.path.join(benchlib.OUT, "sim-d%d-s%d" % (args.days, args.seed),
                          "files")
    benchlib.header("header parse rate")
    benchlib.log("folder: %s, %d files, %.1f MB; %d repeats, alternating"
                 % (os.path.relpath(folder), len(paths), size / 1e6,
                    args.repeats))
    time_dcmdump(folder)  # warm the page cache
    names = ("dcmdump", "import-none", "import-header")
    samples = {name: [] for name in names}
    for repeat in range(args.repeats):
        for name in names:
            if name == "dcmdump":
                elapsed = time_dcmdump(folder)
            else:
                elapsed = time_import(binary, folder, name.split("-")[1],
                                      len(paths))
            samples[name].append(len(paths) / elapsed)
            benchlib.log("  repeat %d %-14s %7.0f files/s"
                         % (repeat + 1, name, len(paths) / elapsed))
    rates = {name: benchlib.median(values) for name, values in samples.items()}
    benchlib.log("")
    benchlib.log("| reader | files/s | ratio to dcmdump |")
    benchlib.log("|---|---:|---:|")
    labels = {"dcmdump": "dcmdump +sd +r (one process)",
              "import-none": "mitilog import, retention none",
              "import-header": "mitilog import, retention header"}
    for name in names:
        benchlib.log("| %s | %.0f | %.2f |" % (labels[name], rates[name],
                                               rates[name] / rates["dcmdump"]))
    os.makedirs(os.path.dirname(args.json), exist_ok=True)
    with open(args.json, "w") as f:
        json.dump({"machine": benchlib.machine(), "files": len(paths),
                   "bytes": size, "files_per_second": rates,
                   "samples": samples}, f, indent=1)
    benchlib.log("results written to %s" % os.path.relpath(args.json))


if __name__ == "__main__":
    main()
