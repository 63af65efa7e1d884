#!/usr/bin/env python3
"""Crash test: kill a bulk import with SIGKILL at random moments and check the library after each.

Generates a few thousand synthetic IR spectra and a manifest, starts `whorl import`, kills it with
`kill -9` at a random moment, and then requires that
  * `whorl check` passes (audit chain, raw hashes, prepared data, fingerprint), and
  * every spectrum is whole or absent: each spectrum row has its revision, its prepared form and
    its import event, and nothing of a spectrum exists without the others;
until at least --kills imports have been killed mid-way. A final re-run must complete the import.

Standard library only. Usage:
    python3 scripts/crash-test.py [--whorl target/debug/whorl] [--files 3000] [--kills 20]
"""

import argparse
import json
import math
import os
import random
import signal
import sqlite3
import subprocess
import sys
import tempfile
import time


def make_files(folder, n, rng):
    os.makedirs(os.path.join(folder, "spectra"), exist_ok=True)
    rows = ["file,technique,name,formula"]
    for i in range(n):
        bands = [(rng.uniform(500, 3600), rng.uniform(0.1, 1.0), rng.uniform(4, 30)) for _ in range(rng.randint(3, 9))]
        lines = ["wavenumber,absorbance"]
        for k in range(901):
            x = 4000 - 4 * k
            y = 0.01 + sum(h * math.exp(-(((x - c) / w) ** 2)) for c, h, w in bands)
            lines.append(f"{x},{y:.5f}")
        name = f"spectra/s{i:05d}.csv"
        with open(os.path.join(folder, name), "w") as f:
            f.write("\n".join(lines) + "\n")
        rows.append(f"{name},ir,synthetic compound {i:05d},C{1 + i % 20}H{2 + i % 30}O")
    with open(os.path.join(folder, "manifest.csv"), "w") as f:
        f.write("\n".join(rows) + "\n")


def whole_or_absent(db):
    """Every spectrum has its revision, prepared form and event, and nothing is orphaned."""
    con = sqlite3.connect(db)
    try:
        q = lambda sql: con.execute(sql).fetchone()[0]
        problems = []
        if q("SELECT count(*) FROM spectrum s WHERE NOT EXISTS (SELECT 1 FROM revision r WHERE r.spectrum_id = s.id)"):
            problems.append("a spectrum without its revision")
        if q("SELECT count(*) FROM spectrum s WHERE NOT EXISTS (SELECT 1 FROM prepared p WHERE p.spectrum_id = s.id)"):
            problems.append("a spectrum without its prepared form")
        if q("SELECT count(*) FROM prepared p WHERE NOT EXISTS (SELECT 1 FROM spectrum s WHERE s.id = p.spectrum_id)"):
            problems.append("a prepared form without its spectrum")
        if q("SELECT count(*) FROM revision r WHERE NOT EXISTS (SELECT 1 FROM spectrum s WHERE s.id = r.spectrum_id)"):
            problems.append("a revision without its spectrum")
        adds = q("SELECT count(*) FROM event WHERE action = 'add'")
        spectra = q("SELECT count(*) FROM spectrum")
        if adds != spectra:
            problems.append(f"{spectra} spectra but {adds} add events")
        return spectra, problems
    finally:
        con.close()


def main():
    ap = argparse.ArgumentParser(description=__doc__, formatter_class=argparse.RawDescriptionHelpFormatter)
    ap.add_argument("--whorl", default="target/debug/whorl")
    ap.add_argument("--files", type=int, default=3000)
    ap.add_argument("--kills", type=int, default=20)
    ap.add_argument("--batch", type=int, default=50, help="spectra per transaction (WHORL_IMPORT_BATCH)")
    ap.add_argument("--seed", type=int, default=20261202)
    args = ap.parse_args()
    whorl = os.path.abspath(args.whorl)
    rng = random.Random(args.seed)
    env = dict(os.environ, WHORL_USER="crash.test", WHORL_IMPORT_BATCH=str(args.batch))

    with tempfile.TemporaryDirectory(prefix="whorl-crash-") as tmp:
        data = os.path.join(tmp, "data")
        lib = os.path.join(tmp, "lib")
        t0 = time.time()
        make_files(data, args.files, rng)
        print(f"generated {args.files} IR files in {time.time() - t0:.1f} s", flush=True)
        subprocess.run([whorl, "--library", lib, "init"], check=True, env=env, stdout=subprocess.DEVNULL)
        manifest = os.path.join(data, "manifest.csv")
        db = os.path.join(lib, "library.sqlite")

        kills, runs, last = 0, 0, 0
        # Kill moments are drawn up to max_delay, which adapts to the import rate seen so far so
        # that about twice the wanted kills fit into the import, on a fast machine or a slow one.
        max_delay = 1.0
        target = args.files / (2 * args.kills)
        while kills < args.kills:
            runs += 1
            if runs > args.kills * 5:
                sys.exit(f"FAIL: only {kills} kills landed in {runs} runs; use more --files")
            p = subprocess.Popen([whorl, "--library", lib, "import", manifest], env=env,
                                 stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL)
            delay = rng.uniform(0.02, max_delay)
            time.sleep(delay)
            if p.poll() is None:
                os.kill(p.pid, signal.SIGKILL)
                p.wait()
                kills += 1
                landed = "killed"
            else:
                landed = f"finished before the kill (exit {p.returncode})"
            check = subprocess.run([whorl, "--library", lib, "check", "--json"], env=env, capture_output=True, text=True)
            report = json.loads(check.stdout) if check.stdout else {"findings": ["no report"]}
            spectra, problems = whole_or_absent(db)
            print(f"run {runs:2d}: {landed}; {spectra} spectra stored; check exit {check.returncode}, "
                  f"{len(report['findings'])} findings; {len(problems)} partial records", flush=True)
            if check.returncode != 0 or report["findings"] or problems:
                print(check.stdout, check.stderr, problems, file=sys.stderr)
                sys.exit("FAIL: the library is not whole after a kill")
            if spectra < last:
                sys.exit("FAIL: spectra were lost")
            if spectra > last:
                rate = (spectra - last) / delay  # spectra per second, start-up included
                max_delay = min(3.0, max(0.1, 2 * target / rate))
            else:
                max_delay = min(3.0, max_delay * 1.3)  # killed before its first commit
            last = spectra
            if spectra == args.files:
                break

        final = subprocess.run([whorl, "--library", lib, "import", manifest, "--json"], env=env, capture_output=True, text=True)
        summary = json.loads(final.stdout)
        spectra, problems = whole_or_absent(db)
        check = subprocess.run([whorl, "--library", lib, "check"], env=env, capture_output=True, text=True)
        print(f"final run: imported {summary['imported']}, already present {summary['already_present']}, "
              f"rejected {len(summary['rejected'])}; {spectra} spectra; check exit {check.returncode}")
        if final.returncode != 0 or spectra != args.files or problems or check.returncode != 0:
            sys.exit("FAIL: the final re-run did not complete the import")
        print(f"PASS: {kills} kills survived, library whole after each, final import complete")


if __name__ == "__main__":
    main()
