#!/usr/bin/env python3
"""Crash test: kill a bulk import with SIGKILL at random moments and check the library after each.

Generates a few thousand synthetic IR spectra and a manifest, starts `whorl import`, kills it with
`kill -9` at a random moment, and then requires that
  * `whorl check` passes (audit chain, raw hashes, prepared data, state hash), and
  * every spectrum is whole or absent: each spectrum row has its revision, its prepared form and
    its import event, and nothing of a spectrum exists without the others;
until at least --kills imports have been killed mid-way. A final re-run must complete the import.

With --commands N it then kills each other write command N times at random moments (review,
revise, withdraw, reinstate, export, recipe change, bundle import, cache rebuild by `check`),
requiring after each that `check` finds nothing (a removed cache is derived data), that no
spectrum or event was lost, and that no export left its partial folder once the library was
opened again. A kill that lands after the command finished is not counted.

Standard library only. Usage:
    python3 scripts/crash-test.py [--whorl target/debug/whorl] [--files 3000] [--kills 20] [--commands 20]
"""

import argparse
import json
import math
import os
import random
import shutil
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
        # A formula a structure can have (IHD = C - H/2 + 1 >= 0, common practice): whorl
        # refuses one that cannot.
        c = 1 + i % 20
        rows.append(f"{name},ir,synthetic compound {i:05d},C{c}H{2 * c + 2 - 2 * (i % (c + 1))}O")
    with open(os.path.join(folder, "manifest.csv"), "w") as f:
        f.write("\n".join(rows) + "\n")


def make_more(folder, start, n, rng):
    """Files for the second library's bundle, named t#####.csv."""
    for i in range(start, start + n):
        bands = [(rng.uniform(500, 3600), rng.uniform(0.1, 1.0), rng.uniform(4, 30)) for _ in range(5)]
        lines = ["wavenumber,absorbance"]
        for k in range(901):
            x = 4000 - 4 * k
            lines.append(f"{x},{0.01 + sum(h * math.exp(-(((x - c) / w) ** 2)) for c, h, w in bands):.5f}")
        with open(os.path.join(folder, f"spectra/t{i:05d}.csv"), "w") as f:
            f.write("\n".join(lines) + "\n")


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


def whorl_json(whorl, lib, env, *args):
    out = subprocess.run([whorl, "--library", lib, *args, "--json"], env=env, capture_output=True, text=True)
    return json.loads(out.stdout) if out.returncode == 0 else None


def write_commands(whorl, lib, env, rng, kills, data):
    """Kill every other write command at random moments: after each kill, `check` must find
    nothing, no spectrum or event may be lost, and no export may leave a folder behind once
    the library is opened again. Returns the kills landed per command."""
    db = os.path.join(lib, "library.sqlite")

    def ids(status):
        con = sqlite3.connect(db)
        try:
            return [r[0] for r in con.execute("SELECT id FROM spectrum WHERE status = ? ORDER BY id", (status,))]
        finally:
            con.close()

    def counts():
        con = sqlite3.connect(db)
        try:
            return con.execute("SELECT count(*) FROM spectrum").fetchone()[0], con.execute("SELECT count(*) FROM event").fetchone()[0]
        finally:
            con.close()

    # A second library's bundle, for the bundle import.
    source = os.path.join(data, "source")
    subprocess.run([whorl, "--library", source, "init"], check=True, env=env, stdout=subprocess.DEVNULL)
    subprocess.run([whorl, "--library", source, "import", os.path.join(data, "manifest2.csv")], env=env,
                   stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL)
    bundle = os.path.join(data, "bundle")
    subprocess.run([whorl, "--library", source, "export", bundle], check=True, env=env, stdout=subprocess.DEVNULL)

    exports = os.path.join(data, "exports")
    os.makedirs(exports, exist_ok=True)
    landed = {}
    commands = {
        "review": lambda n: ["review", str(rng.choice(ids("pending"))), "--verify", "--by", "r.reviewer"],
        "revise": lambda n: ["revise", str(rng.choice(ids("pending") + ids("verified"))), "--note", f"note {n}",
                             "--reason", "crash test", "--by", "e.editor"],
        "withdraw": lambda n: ["withdraw", str(rng.choice(ids("pending") + ids("verified"))), "--reason", "crash test",
                               "--by", "q.manager"],
        "reinstate": lambda n: ["reinstate", str(rng.choice(ids("withdrawn"))), "--reason", "crash test", "--by", "c.curator"],
        "export": lambda n: ["export", os.path.join(exports, f"e{n}")],
        # A lambda of its own per run, so every run is a change (asking for the recipe already
        # in place is refused at once, and an ALS lambda needs `--baseline als`).
        "recipe": lambda n: ["recipe", "ir", "--baseline", "als", "--als-lambda", str(10_000 * (n + 1)),
                             "--reason", "crash test"],
        "bundle import": lambda n: ["import", bundle, "--untrusted"],
        "cache rebuild": lambda n: ["check"],
    }
    for name, make in commands.items():
        runs, kills, max_delay = 0, 0, 0.3
        while kills < KILLS[0] and runs < 8 * KILLS[0]:
            runs += 1
            if name == "review" and not ids("pending"):
                continue
            if name == "reinstate" and not ids("withdrawn"):
                subprocess.run([whorl, "--library", lib, "withdraw", str(ids("pending")[0]), "--reason", "setup", "--by", "q"],
                               env=env, stdout=subprocess.DEVNULL)
            if name == "cache rebuild":
                shutil.rmtree(os.path.join(lib, "cache"), ignore_errors=True)
            before = counts()
            t = time.time()
            killed, _ = kill_after([whorl, "--library", lib, *make(runs)], env, rng.uniform(0.005, max_delay))
            if killed:
                kills += 1
            else:
                # Finished first: aim earlier next time.
                max_delay = max(0.01, min(max_delay, (time.time() - t)) * 0.9)
            check = subprocess.run([whorl, "--library", lib, "check", "--json"], env=env, capture_output=True, text=True)
            report = json.loads(check.stdout) if check.stdout else {"findings": ["no report"]}
            after = counts()
            partial = [f for f in os.listdir(exports) if f.endswith(".partial")]
            findings = [f for f in report["findings"] if not f["record"].startswith("cache:")]
            if check.returncode not in (0, 5) or findings or after[0] < before[0] or after[1] < before[1] or partial:
                print(check.stdout, check.stderr, partial, before, after, file=sys.stderr)
                sys.exit(f"FAIL: {name}: the library is not whole after a kill")
        landed[name] = (kills, runs)
        print(f"{name}: {kills} kills in {runs} runs; check clean, nothing lost, no partial export after each", flush=True)
        if kills < KILLS[0]:
            sys.exit(f"FAIL: {name}: only {kills} kills landed in {runs} runs")
    return landed


KILLS = [3]


def kill_after(cmd, env, delay):
    """Starts `cmd`, waits `delay` seconds and SIGKILLs it if it is still running: (whether it
    was killed, its exit code if it finished first)."""
    p = subprocess.Popen(cmd, env=env, stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL)
    time.sleep(delay)
    if p.poll() is None:
        os.kill(p.pid, signal.SIGKILL)
        p.wait()
        return True, None
    return False, p.returncode


def kill_import(whorl, lib, manifest, db, env, rng, args, wanted, files):
    """SIGKILLs `whorl import` of `manifest` into `lib` at random moments until `wanted` kills
    landed or the import completed, checking the library after each; then completes the
    import and checks it. Returns the kills that landed."""
    kills, runs, last = 0, 0, 0
    # Kill moments are drawn up to max_delay, which adapts to the import rate seen so far so
    # that about twice the wanted kills fit into the import, on a fast machine or a slow one.
    max_delay = 1.0
    target = files / (2 * wanted)
    while kills < wanted:
        runs += 1
        if runs > wanted * 5:
            sys.exit(f"FAIL: only {kills} kills landed in {runs} runs; use more --files")
        delay = rng.uniform(0.02, max_delay)
        killed, code = kill_after([whorl, "--library", lib, "import", manifest], env, delay)
        if killed:
            kills += 1
            landed = "killed"
        else:
            landed = f"finished before the kill (exit {code})"
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
        if spectra == files:
            break

    final = subprocess.run([whorl, "--library", lib, "import", manifest, "--json"], env=env, capture_output=True, text=True)
    summary = json.loads(final.stdout)
    spectra, problems = whole_or_absent(db)
    check = subprocess.run([whorl, "--library", lib, "check"], env=env, capture_output=True, text=True)
    print(f"final run: imported {summary['imported']}, already present {summary['already_present']}, "
          f"rejected {len(summary['rejected'])}; {spectra} spectra; check exit {check.returncode}")
    if final.returncode != 0 or spectra != files or problems or check.returncode != 0:
        sys.exit("FAIL: the final re-run did not complete the import")
    return kills


def main():
    ap = argparse.ArgumentParser(description=__doc__, formatter_class=argparse.RawDescriptionHelpFormatter)
    ap.add_argument("--whorl", default="target/debug/whorl")
    ap.add_argument("--files", type=int, default=3000)
    ap.add_argument("--kills", type=int, default=20)
    ap.add_argument("--batch", type=int, default=50, help="spectra per transaction (WHORL_IMPORT_BATCH)")
    ap.add_argument("--seed", type=int, default=20261202)
    ap.add_argument("--commands", type=int, default=0, metavar="N",
                    help="after the import, kill every other write command N times (review, revise, withdraw, "
                         "reinstate, export, recipe, bundle import, cache rebuild)")
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

        kills, rounds = 0, 0
        while True:
            rounds += 1
            if rounds > 1:
                # The import finished before the kills asked for landed (a fast machine): the
                # same import again, killed anew, into a fresh library.
                print(f"the import finished after {kills} of {args.kills} kills; again into a fresh library", flush=True)
                shutil.rmtree(lib)
                subprocess.run([whorl, "--library", lib, "init"], check=True, env=env, stdout=subprocess.DEVNULL)
            kills += kill_import(whorl, lib, manifest, db, env, rng, args, args.kills - kills, args.files)
            if kills >= args.kills or args.commands or rounds >= 5:
                break
        if kills < args.kills and not args.commands:
            sys.exit(f"FAIL: only {kills} of the {args.kills} kills asked for landed in {rounds} imports; use more --files")
        if kills < args.kills:
            # With --commands the import is the set-up of the library the other commands are
            # killed in; a small one may finish before its kills land.
            print(f"import: {kills} of {args.kills} kills landed before it finished (set-up for --commands); "
                  "library whole after each, final import complete")
        else:
            print(f"PASS: {kills} kills survived in {rounds} import(s), library whole after each, final import complete")
        if args.commands:
            KILLS[0] = args.commands
            with open(os.path.join(data, "manifest2.csv"), "w") as f:
                f.write("file,technique,name\n")
                for i in range(args.files, args.files + 200):
                    f.write(f"spectra/t{i:05d}.csv,ir,other compound {i:05d}\n")
            make_more(data, args.files, 200, rng)
            landed = write_commands(whorl, lib, env, rng, args.commands, data)
            total = sum(k for k, _ in landed.values())
            print(f"PASS: {total} kills across {len(landed)} write commands, library whole after each")


if __name__ == "__main__":
    main()
