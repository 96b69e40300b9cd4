"""The performance harness: the figures of DESIGN.md section 9, measured as whole processes.

Usage::

    python benchmarks/run.py [--sizes 1k,10k,100k] [--skip-app] [--data benchmarks/data]

For each size it (re)generates ``synth-<size>`` when missing (benchmarks/generate.py) and measures:

* floor: a process that reads and parses every record file with orjson, the time no implementation
  that reads these files can beat;
* load: ``Context.load`` in process (every kind loaded and the species table built);
* check: ``tablekeeper check --format json`` as a process, with its peak memory (the child's own
  rusage from wait4);
* release, verify, diff: ``tablekeeper release`` of the dataset without its seeded faults, ``verify``
  of the archive written, ``diff`` of that bundle against the dataset with 1 % of values changed;
* frictionless: ``frictionless.validate`` of the released datapackage.json, a general-purpose tabular
  validator from the package registry, as a process, for scale beside ``verify``;
* app: time to first screen and the median time per key press of the terminal app, headless.

It prints one table: each figure, its time, its ratio to the floor, the time per species, and the
target of DESIGN.md section 9 where one exists. Nothing here asserts: a benchmark measures.
"""

from __future__ import annotations

import argparse
import json
import os
import platform
import shutil
import subprocess
import sys
import tempfile
import time
from pathlib import Path

HERE = Path(__file__).resolve().parent
PY = sys.executable

FLOOR = """
import os, sys, orjson
root = sys.argv[1]
n = 0
for kind in ("species", "sources", "reactions", "flags"):
    d = os.path.join(root, kind)
    for name in os.listdir(d):
        if name.endswith(".json"):
            with open(os.path.join(d, name), "rb") as fh:
                orjson.loads(fh.read())
            n += 1
print(n)
"""

LOAD = """
import sys, time, json
t = time.perf_counter()
from tablekeeper.checks import Context
from tablekeeper.store import Dataset
t_import = time.perf_counter() - t
t = time.perf_counter()
ctx = Context.load(Dataset(sys.argv[1]))
t_load = time.perf_counter() - t
from tablekeeper.checks import run
t = time.perf_counter()
report = run(ctx)
t_checks = time.perf_counter() - t
print(json.dumps({"import": t_import, "load": t_load, "checks": t_checks, "species": len(ctx.species)}))
"""

APP = """
import asyncio, json, statistics, sys, time
t0 = time.perf_counter()
from tablekeeper.tui.app import create_app

async def main():
    app = create_app(sys.argv[1], poll_interval=3600)
    async with app.run_test(size=(100, 30)) as pilot:
        while app.snapshot is None:
            await pilot.pause(0.01)
        await pilot.pause()
        first = time.perf_counter() - t0
        presses = []
        for key in ["down"] * 10 + ["pagedown"] * 10 + ["end", "home", "pageup", "down"]:
            t = time.perf_counter()
            await pilot.press(key)
            await pilot.pause()
            presses.append(time.perf_counter() - t)
        return first, app.first_screen_seconds, presses

first, own, presses = asyncio.run(main())
print(json.dumps({"first": first, "app_first": own, "press_median": statistics.median(presses),
                  "press_max": max(presses)}))
"""


def timed(args: list[str], env: dict | None = None) -> tuple[float, int, str, int]:
    """Run a process; (wall seconds, peak RSS in MiB of that process, stdout, exit status)."""
    t = time.perf_counter()
    p = subprocess.Popen(args, stdout=subprocess.PIPE, stderr=subprocess.PIPE, env=env)
    out, err = p.communicate()
    wall = time.perf_counter() - t
    # communicate() reaped the child; its rusage is folded into RUSAGE_CHILDREN, so measure RSS through
    # a wrapper instead when it matters (see peak()).
    return wall, 0, out.decode(errors="replace") + err.decode(errors="replace"), p.returncode


def peak(args: list[str], env: dict | None = None) -> tuple[float, float, str, int]:
    """Run a process and reap it with wait4: (wall seconds, its own peak RSS in MiB, output, status)."""
    t = time.perf_counter()
    with tempfile.TemporaryFile() as out:
        p = subprocess.Popen(args, stdout=out, stderr=subprocess.STDOUT, env=env)
        _, status, usage = os.wait4(p.pid, 0)
        wall = time.perf_counter() - t
        p.returncode = os.waitstatus_to_exitcode(status)
        out.seek(0)
        text = out.read().decode(errors="replace")
    return wall, usage.ru_maxrss / 1024.0, text, p.returncode


def tk(*args: str) -> list[str]:
    return [PY, "-m", "tablekeeper.cli", *args]


def clean_copy(src: Path, faults: dict[str, str], dst: Path) -> Path:
    """A hard-linked copy of the dataset without its faulty species (saves replace files, never write
    into them, so the original stays as it was)."""
    if dst.exists():
        shutil.rmtree(dst)
    shutil.copytree(src, dst, copy_function=os.link)
    for ident in faults:
        for name in (ident, ident + "-dup"):
            (dst / "species" / f"{name}.json").unlink(missing_ok=True)
    return dst


def changed_copy(src: Path, dst: Path, share: float = 0.01) -> int:
    """A copy with ``share`` of species' ΔfH° raised by 0.1 kJ/mol (for diff)."""
    from tablekeeper import jsonio

    if dst.exists():
        shutil.rmtree(dst)
    shutil.copytree(src, dst, copy_function=os.link)
    files = sorted((dst / "species").glob("*.json"))
    step = max(1, int(1 / share))
    n = 0
    for f in files[::step]:
        rec = jsonio.read(f)
        if "dfH298" in rec.get("properties", {}):
            rec["properties"]["dfH298"]["value"] = round(rec["properties"]["dfH298"]["value"] + 0.1, 3)
            f.unlink()  # break the hard link before writing
            f.write_bytes(jsonio.dumps(rec))
            n += 1
    return n


def measure(size_label: str, data: Path, skip_app: bool) -> dict:
    from generate import generate, parse_size

    root = data / f"synth-{size_label}"
    faults_file = data / f"synth-{size_label}.faults.json"
    if not root.is_dir() or not faults_file.is_file():
        print(f"generating {root} ...", flush=True)
        generate(parse_size(size_label), 1, 0.02, data)
    faults = json.loads(faults_file.read_text())
    n = sum(1 for _ in os.scandir(root / "species"))
    res: dict = {"size": size_label, "species": n}
    work = Path(tempfile.mkdtemp(prefix=f"tk-bench-{size_label}-", dir=str(data)))
    try:
        # Warm the page cache once, so that every figure reads from memory as the floor does.
        subprocess.run([PY, "-c", FLOOR, str(root)], capture_output=True)
        res["floor"], _, _, _ = timed([PY, "-c", FLOOR, str(root)])
        _, _, out, _ = timed([PY, "-c", LOAD, str(root)])
        inproc = json.loads(out.strip().splitlines()[-1])
        res["load"], res["checks_only"], res["import"] = inproc["load"], inproc["checks"], inproc["import"]
        res["check"], res["check_rss"], out, rc = peak(tk("check", str(root), "--format", "json"))
        summary = json.loads(out[out.index("{") :])["summary"] if "{" in out else {}
        res["check_exit"], res["findings"] = rc, summary
        clean = clean_copy(root, faults, work / "clean")
        bundles = work / "bundles"
        env = dict(os.environ, SOURCE_DATE_EPOCH="1700000000")
        res["release"], res["release_rss"], out, rc = peak(
            tk("release", str(clean), "--version", "1.0.0", "--out", str(bundles), "--allow-warnings"),
            env=env,
        )
        res["release_exit"] = rc
        if rc != 0:
            print(f"release refused ({rc}):\n{out[-2000:]}", flush=True)
        archive = next(bundles.glob("*.tar.gz"), None)
        folder = next((p for p in bundles.iterdir() if p.is_dir()), None) if bundles.is_dir() else None
        if archive is not None:
            res["verify"], res["verify_rss"], out, res["verify_exit"] = peak(tk("verify", str(archive)))
            changed = work / "changed"
            res["diff_changed"] = changed_copy(clean, changed)
            res["diff"], res["diff_rss"], out, res["diff_exit"] = peak(tk("diff", str(folder), str(changed)))
            fl = (
                "import sys; from frictionless import validate; r = validate(sys.argv[1]); "
                "print(r.valid, r.stats.get('errors') if hasattr(r, 'stats') else '')"
            )
            res["frictionless"], res["frictionless_rss"], out, _ = peak(
                [PY, "-c", fl, str(folder / "datapackage.json")]
            )
            res["frictionless_out"] = out.strip().splitlines()[-1][:120] if out.strip() else ""
        if not skip_app:
            _, rss, out, rc = peak([PY, "-c", APP, str(root)])
            if rc == 0:
                app = json.loads(out.strip().splitlines()[-1])
                res.update(
                    app_first=app["first"],
                    app_press=app["press_median"],
                    app_press_max=app["press_max"],
                    app_rss=rss,
                )
            else:
                res["app_error"] = out[-1500:]
    finally:
        shutil.rmtree(work, ignore_errors=True)
    return res


TARGETS = {("check", "10k"): 2.0, ("check", "100k"): 15.0, ("release", "10k"): 5.0, ("app_press", "10k"): 0.1}


def table(results: list[dict]) -> str:
    rows = [("figure", "size", "seconds", "÷ floor", "µs/species", "peak MiB", "target")]

    def add(name: str, r: dict, key: str, rss_key: str | None = None, per_species: bool = True) -> None:
        if key not in r:
            return
        secs = r[key]
        # A key press does not scale with the dataset: no ratio to the floor, no cost per species.
        ratio = f"{secs / r['floor']:.1f}×" if r.get("floor") and per_species else ""
        target = TARGETS.get((key, r["size"]))
        rows.append(
            (
                name,
                r["size"],
                f"{secs:.3f}",
                ratio,
                f"{secs / r['species'] * 1e6:.0f}" if per_species else "",
                f"{r[rss_key]:.0f}" if rss_key and rss_key in r else "",
                f"< {target:g} s" if target else "",
            )
        )

    for r in results:
        add("floor: read + parse (orjson)", r, "floor")
        add("load (in process)", r, "load")
        add("checks only (in process)", r, "checks_only")
        add("check (process)", r, "check", "check_rss")
        add("release (process)", r, "release", "release_rss")
        add("verify archive (process)", r, "verify", "verify_rss")
        add("diff bundle vs dataset", r, "diff", "diff_rss")
        add("frictionless validate", r, "frictionless", "frictionless_rss")
        if "verify" in r and "frictionless" in r:
            rows.append(
                (
                    "  verify ÷ frictionless",
                    r["size"],
                    "",
                    f"{r['verify'] / r['frictionless']:.2f}×",
                    "",
                    "",
                    "",
                )
            )
        add("app: first screen", r, "app_first", "app_rss")
        add("app: key press (median)", r, "app_press", per_species=False)
        add("app: key press (slowest)", r, "app_press_max", per_species=False)
    widths = [max(len(str(row[i])) for row in rows) for i in range(len(rows[0]))]
    lines = [
        "  ".join(
            str(c).ljust(w) if i == 0 else str(c).rjust(w)
            for i, (c, w) in enumerate(zip(row, widths, strict=True))
        )
        for row in rows
    ]
    lines.insert(1, "  ".join("-" * w for w in widths))
    return "\n".join(lines)


def machine() -> str:
    cpu = "?"
    try:
        for line in Path("/proc/cpuinfo").read_text().splitlines():
            if line.startswith("model name"):
                cpu = line.split(":", 1)[1].strip()
                break
    except OSError:
        pass
    nproc = len(os.sched_getaffinity(0))
    return f"{os.cpu_count()} CPUs (nproc {nproc}), {cpu}, Python {platform.python_version()}"


def main(argv: list[str] | None = None) -> int:
    p = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    p.add_argument("--sizes", default="1k,10k,100k")
    p.add_argument("--skip-app", action="store_true")
    p.add_argument("--data", default=str(HERE / "data"))
    p.add_argument("--json", help="also write the raw figures to this file")
    args = p.parse_args(argv)
    sys.path.insert(0, str(HERE))
    data = Path(args.data)
    data.mkdir(parents=True, exist_ok=True)
    results = []
    for label in args.sizes.split(","):
        print(f"measuring {label} ...", flush=True)
        results.append(measure(label.strip(), data, args.skip_app))
    print()
    print(machine())
    print(table(results))
    for r in results:
        extra = {
            k: r[k]
            for k in (
                "findings",
                "check_exit",
                "release_exit",
                "verify_exit",
                "diff_exit",
                "diff_changed",
                "frictionless_out",
                "app_press_max",
                "app_error",
            )
            if k in r
        }
        print(f"{r['size']}: {extra}")
    if args.json:
        Path(args.json).write_text(json.dumps(results, indent=1))
    return 0


if __name__ == "__main__":
    sys.exit(main())
