#!/usr/bin/env python3
"""Prints the figures of scripts/bench-arm.sh from the runner's JSON files (one per build).

    report.py RESULTS_DIR

Each file is named UNIT.LANG.CORE.OPT.json. Prints, per unit: instructions per sample for every stream and
path and build, the Cortex-M0 cycle estimates, the library-helper calls per sample, the helpers each
build links, flash, the per-sample code (all of it, then a hit's and the build's apart, and the most common
sample's), static RAM, the stage cache's size and the stack high-water
mark, and whether every result matched the host bit for bit.
"""
import glob

# The builds: the C library compiled on its own with the unit's data in another translation unit (what a
# firmware loading images at run time gets), the C library with the unit's data in one translation unit
# (a build per serial), Rust, and the naive float correction.
LANGS = ("c", "c1", "rust", "naive")
NAME = {"c": "C", "c1": "C one TU", "rust": "Rust", "naive": "naive"}
import json
import os
import sys

CORES = [("m0", "O2"), ("m0", "Os"), ("m4", "O2"), ("m4", "Os")]
CORE_NAME = {"m0": "Cortex-M0", "m4": "Cortex-M4F"}


def load(d):
    out = {}
    for f in sorted(glob.glob(os.path.join(d, "*.json"))):
        unit, lang, core, opt = os.path.basename(f)[:-5].split(".")
        out[(unit, lang, core, opt)] = json.load(open(f))
    return out


def fmt(v, digits=0):
    if v is None:
        return "-"
    return f"{v:,.{digits}f}"


def main():
    d = sys.argv[1]
    res = load(d)
    units = sorted({k[0] for k in res})
    all_exact = True
    for unit in units:
        meta = json.load(open(os.path.join(d, f"../data/{unit}/meta.json")))
        print(f"\n=== unit {unit}: {meta['desc']}; tables {meta['table_bytes']} + {meta['universal_bytes']} shared "
              f"= {meta['table_bytes'] + meta['universal_bytes']} bytes ===")
        builds = [(lang, core, opt) for core, opt in CORES for lang in LANGS if (unit, lang, core, opt) in res]
        streams = ["new", "held", "wander"]
        rows = []
        for st in streams:
            for p in ("direct", "cached", "table", "block", "tblock", "naive"):
                for lang in LANGS:
                    if any(res.get((unit, lang, c, o), {}).get("streams", {}).get(st, {}).get(p) for c, o in CORES):
                        rows.append((st, p, lang))

        def cell(key, st, p, f, width):
            r = res.get(key, {}).get("streams", {}).get(st, {}).get(p)
            return f"{f(r) if r else '':>{width}}"

        print("\ninstructions per sample (mean, and max over the stream), the call itself subtracted")
        print(f"{'stream / path':<26}" + "".join(f"{CORE_NAME[c] + ' -' + o:>24}" for c, o in CORES))
        for st, p, lang in rows:
            label = f"{st} / {p}" + ("" if lang == "naive" else f" ({NAME[lang]})")
            print(f"{label:<26}" + "".join(
                cell((unit, lang, c, o), st, p, lambda r: f"{fmt(r['insns_mean'])} (max {fmt(r['insns_max'])})", 24)
                for c, o in CORES))
        for c, o in CORES:
            for lang in ("c", "c1", "rust"):
                for p, what in (("block", "the block's stage"), ("tblock", "the block's code table")):
                    r = res.get((unit, lang, c, o), {}).get("streams", {}).get("held", {}).get(p)
                    if r and "stage_insns" in r:
                        print(f"  ({CORE_NAME[c]} -{o} {NAME[lang]}: building {what} "
                              f"{fmt(r['stage_insns'])} instructions, once per block)")
        print("\nthe same per sample without the samples that built a stage or a table (more than four times the "
              "median), and those builds: hits; builds x mean")
        print(f"{'stream / path':<26}" + "".join(f"{CORE_NAME[c] + ' -' + o:>24}" for c, o in CORES))
        for st, p, lang in rows:
            if p not in ("cached", "table"):
                continue
            label = f"{st} / {p} ({NAME[lang]})"
            print(f"{label:<26}" + "".join(
                cell((unit, lang, c, o), st, p,
                     lambda r: f"{fmt(r.get('insns_hit_mean'))}; {r.get('builds', 0)} x {fmt(r.get('build_insns_mean'))}",
                     24)
                for c, o in CORES))
        fb = meta.get("table_fallbacks", {})
        if fb:
            print("  code table: samples whose code it does not interpolate (they take the stage cache), of the "
                  "samples whose code the converter accepts: " + "; ".join(
                      f"{st} {k} of {n} ({100.0 * k / n if n else 0:.1f} %)" for st, (k, n) in fb.items()
                      if st != "new"))
        print("\nCortex-M0 cycles per sample, estimated: fast (single-cycle) / small (32-cycle) multiplier")
        print(f"{'stream / path':<26}" + "".join(f"{'Cortex-M0 -' + o:>24}" for c, o in CORES if c == "m0"))
        for st, p, lang in rows:
            label = f"{st} / {p}" + ("" if lang == "naive" else f" ({NAME[lang]})")
            print(f"{label:<26}" + "".join(
                cell((unit, lang, c, o), st, p,
                     lambda r: f"{fmt(r['cycles_mean'])} / {fmt(r['cycles_mean'] + 31 * r['muls_mean'])}", 24)
                for c, o in CORES if c == "m0"))
        print("\nlibrary-helper calls per sample (Cortex-M0 -O2)")
        for l in LANGS:
            r = res.get((unit, l, "m0", "O2"))
            if not r:
                continue
            for s in streams:
                for p, v in r["streams"][s].items():
                    calls = ", ".join(f"{k} {n:.2f}" for k, n in v["helper_calls"].items()) or "none"
                    print(f"  {l.upper():<6}{s + ' / ' + p:<18}{calls}")
        print("\nhelpers linked, flash, per-sample code, static RAM, stage cache, stack high-water mark")
        for l, c, o in builds:
            r = res[(unit, l, c, o)]
            stack = max(v["stack"] for s in r["streams"].values() for p, v in s.items())
            code = "; ".join(f"{p} {v['functions']} B ({v['executed']} B run)" for p, v in r["code"].items())
            hit = "; ".join(
                f"{p} {v['hit']['functions']} B ({v['hit']['executed']} B run), build apart "
                f"{v['build_only']['functions']} B" for p, v in r["code"].items() if "hit" in v)
            print(f"  {CORE_NAME[c]} -{o} {l.upper():<5} flash {r['flash']:>6} B, static RAM {r['static_ram']} B "
                  f"+ stage cache {r['cache_bytes']} B (code table {r.get('table_bytes', 0)} B), stack {stack} B")
            print(f"      per-sample code (functions entered, wrapper included): {code}")
            print(f"      a hit's code (functions entered by samples that build nothing): {hit}")
            common = "; ".join(
                f"{p} {v['common']['functions']} B ({v['common']['executed']} B run; {100 * v['common']['share']:.0f} %)"
                for p, v in r["code"].items() if "common" in v)
            if common:
                print(f"      the most common sample's code (the functions most samples enter; their share): {common}")
            print(f"      helpers linked: {', '.join(r['helpers_linked']) or 'none'}")
        print("\nagreement with the host library (status, x, dB, ratio of every sample)")
        for l, c, o in builds:
            if l == "naive":
                continue
            r = res[(unit, l, c, o)]
            bad = []
            for s, paths in r["streams"].items():
                for p, v in paths.items():
                    if v["mismatches"]:
                        bad.append(f"{s}/{p}: {v['mismatches']} (first at sample {v['first_mismatch']})")
            all_exact &= not bad
            print(f"  {CORE_NAME[c]} -{o} {l.upper():<5} {'bit for bit' if not bad else 'MISMATCH ' + '; '.join(bad)}")
    print("\nall ARM results identical to the host's:", "yes" if all_exact else "NO")
    return 0 if all_exact else 1


if __name__ == "__main__":
    sys.exit(main())
