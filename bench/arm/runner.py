#!/usr/bin/env python3
"""Runs one ARM build of the bench driver in the unicorn CPU emulator and measures it per sample.

    runner.py ELF BENCH_JSON --core m0|m4 --label TEXT [--paths direct,cached,naive] [--json OUT]

For every stream of BENCH_JSON (written by the host example `arm_bench`) and every path, it writes the
inputs into the image's buffers, calls the driver's `bench_<path>(i)` once per sample and counts the
instructions executed in that call, less those of `bench_empty(i)` (the call itself). It also counts the
calls into library helpers (`__aeabi_*`, `__clz*`, `__*di3`, ...), estimates Cortex-M0 cycles from the
instruction timings, paints the stack to find its high-water mark, and compares the fixed path's results
with the host library's, bit for bit.

Cortex-M0 cycle timings, from memory of the Cortex-M0 Technical Reference Manual (ARM DDI 0432C, table
3-1, "Cortex-M0 instruction summary"): data processing 1; MULS 1 (fast multiplier) or 32 (small
multiplier); LDR/STR and their byte/halfword forms 2; LDM/STM/PUSH/POP 1+N; POP with PC 4+N; B 3; B<cond>
3 taken, 1 not taken; BL 4; BX/BLX 3. Only the executed instructions are counted (no wait states, no
interrupts).

The instruction boundaries come from `arm-none-eabi-objdump -d`, the symbols from `arm-none-eabi-nm`; the
emulator counts per basic block (a block hook) and the block's instructions are looked up.
"""
import argparse
import bisect
import json
import re
import subprocess
import sys
from collections import Counter, defaultdict

import unicorn
from unicorn import arm_const as A

STACK_TOP = 0x20040000
STACK_PAINT = 16 * 1024
PAINT = 0xA5
RETURN_MAGIC = 0x0007FFF0  # a halfword in flash that nothing occupies: the emulation stops there

HELPER = re.compile(r"^(__aeabi_\w+|__clz\w*|__ctz\w*|__\w*di3|__\w*si3|__\w*sf\w*|__\w*df\w*|__popcount\w*)$")


def last_ident(mangled):
    """The last identifier of a run of length-prefixed identifiers (Rust's symbol mangling)."""
    ident, i = mangled, 0
    while i < len(mangled):
        m = re.match(r"[A-Za-z]*(\d+)", mangled[i:])
        if not m:
            break
        n = int(m.group(1))
        start = i + m.end()
        if mangled[start : start + 1] == "_":
            start += 1  # the separator before an identifier that starts with "_" or a digit
        if n == 0 or start + n > len(mangled):
            break
        ident = mangled[start : start + n]
        i = start + n
    return ident


def tool(name, *args):
    return subprocess.run([name, *args], check=True, capture_output=True, text=True).stdout


class Image:
    def __init__(self, elf):
        self.elf = elf
        self.sections = []
        for line in tool("arm-none-eabi-objdump", "-h", elf).splitlines():
            m = re.match(r"\s*\d+\s+(\S+)\s+([0-9a-f]+)\s+([0-9a-f]+)\s+([0-9a-f]+)", line)
            if m:
                name, size, vma = m.group(1), int(m.group(2), 16), int(m.group(3), 16)
                self.sections.append((name, vma, size))
        self.symbols = {}  # name -> (addr, size, type)
        for line in tool("arm-none-eabi-nm", "-S", elf).splitlines():
            parts = line.split()
            if len(parts) == 4:
                addr, size, typ, name = int(parts[0], 16), int(parts[1], 16), parts[2], parts[3]
                self.symbols[name] = (addr & ~1, size, typ)
        # Instruction addresses, mnemonics and the function each belongs to.
        self.insn_addr = []
        self.insn = {}
        func = None
        self.func_of = {}
        for line in tool("arm-none-eabi-objdump", "-d", "--no-show-raw-insn", elf).splitlines():
            m = re.match(r"^([0-9a-f]+) <(.+)>:$", line)
            if m:
                func = m.group(2)
                continue
            m = re.match(r"^\s+([0-9a-f]+):\s+(\S+)\s*(.*)$", line)
            if m and func is not None:
                a = int(m.group(1), 16)
                mnem = m.group(2)
                if mnem.startswith(".") or mnem in ("bad",):
                    continue
                self.insn[a] = (mnem, m.group(3))
                self.func_of[a] = func
        self.insn_addr = sorted(self.insn)
        # Helpers by address; aliases (e.g. __aeabi_lmul and __muldi3) share one entry.
        names = defaultdict(set)
        for name, (addr, _, t) in self.symbols.items():
            if t in "TtWw" and HELPER.match(name):
                names[addr].add(name)
            elif t in "TtWw" and "compiler_builtins" in name:
                # Rust's own helpers under a mangled name: keep the function's name.
                names[addr].add("compiler_builtins::" + last_ident(name.split(".llvm.")[0].split("compiler_builtins")[-1]))
        self.helpers = {addr: "/".join(sorted(n)) for addr, n in names.items()}
        self.block_cache = {}

    def insn_size(self, addr):
        i = bisect.bisect_right(self.insn_addr, addr)
        nxt = self.insn_addr[i] if i < len(self.insn_addr) else addr + 2
        return min(nxt - addr, 4)

    def section_bytes(self, name):
        out = subprocess.run(
            ["arm-none-eabi-objcopy", "-O", "binary", f"--only-section={name}", self.elf, "/dev/stdout"],
            check=True,
            capture_output=True,
        ).stdout
        return out

    def block(self, addr, size):
        key = (addr, size)
        b = self.block_cache.get(key)
        if b is not None:
            return b
        lo = bisect.bisect_left(self.insn_addr, addr)
        hi = bisect.bisect_left(self.insn_addr, addr + size)
        addrs = self.insn_addr[lo:hi]
        cycles = 0
        muls = 0
        cond_branch_end = False
        for a in addrs:
            mnem, ops = self.insn[a]
            c, is_mul = m0_cycles(mnem, ops)
            cycles += c
            muls += is_mul
        if addrs:
            mnem, _ = self.insn[addrs[-1]]
            cond_branch_end = is_cond_branch(mnem)
        b = (len(addrs), cycles, muls, cond_branch_end, addr + size, tuple(addrs))
        self.block_cache[key] = b
        return b


COND = ("eq", "ne", "cs", "cc", "mi", "pl", "vs", "vc", "hi", "ls", "ge", "lt", "gt", "le", "hs", "lo")


def is_cond_branch(mnem):
    m = mnem.split(".")[0]
    return m.startswith("b") and len(m) == 3 and m[1:] in COND or m in ("cbz", "cbnz")


def reg_count(ops):
    m = re.search(r"\{([^}]*)\}", ops)
    if not m:
        return 1
    n = 0
    for part in m.group(1).split(","):
        part = part.strip()
        if "-" in part:
            a, b = part.split("-")
            n += int(b.strip()[1:]) - int(a.strip()[1:]) + 1 if a.strip()[1:].isdigit() and b.strip()[1:].isdigit() else 2
        elif part:
            n += 1
    return n


def m0_cycles(mnem, ops):
    """Cycles of one Thumb instruction on a Cortex-M0 (fast multiplier), and whether it is a MULS."""
    m = mnem.split(".")[0]
    if m in ("muls", "mul"):
        return 1, 1
    if m in ("ldr", "ldrb", "ldrh", "ldrsb", "ldrsh", "str", "strb", "strh"):
        return 2, 0
    if m in ("push", "stmia", "stm", "ldmia", "ldm"):
        return 1 + reg_count(ops), 0
    if m == "pop":
        return (4 if "pc" in ops else 1) + reg_count(ops), 0
    if m == "bl":
        return 4, 0
    if m in ("bx", "blx"):
        return 3, 0
    if m == "b":
        return 3, 0
    if is_cond_branch(m):
        return 1, 0  # +2 when taken, added by the runner
    if m in ("mov", "add") and ops.startswith("pc"):
        return 3, 0
    return 1, 0


class Runner:
    def __init__(self, image, core):
        self.img = image
        self.core = core
        mu = unicorn.Uc(unicorn.UC_ARCH_ARM, unicorn.UC_MODE_THUMB | unicorn.UC_MODE_MCLASS)
        if core == "m0":
            mu.ctl_set_cpu_model(A.UC_CPU_ARM_CORTEX_M0)
        else:
            mu.ctl_set_cpu_model(A.UC_CPU_ARM_CORTEX_M4)
        mu.mem_map(0x00000000, 512 * 1024)
        mu.mem_map(0x20000000, 256 * 1024)
        for name, vma, size in image.sections:
            if size == 0 or name in (".bss",) or name.startswith(".debug") or name.startswith(".ARM.attributes"):
                continue
            if name.startswith(".comment") or name.startswith(".symtab") or name.startswith(".strtab"):
                continue
            data = image.section_bytes(name)
            if data:
                mu.mem_write(vma, data)
        # A `b .` at the return address, so that a stray run past it stays put.
        mu.mem_write(RETURN_MAGIC, b"\xfe\xe7")
        self.mu = mu
        if core == "m4":
            # CPACR: full access to CP10/CP11 (the FPU), as a start-up routine would set it.
            try:
                mu.mem_map(0xE000E000, 0x1000)
            except unicorn.UcError:
                pass
            mu.mem_write(0xE000ED88, (0xF << 20).to_bytes(4, "little"))
            try:
                mu.reg_write(A.UC_ARM_REG_CPACR, 0xF << 20)
            except Exception:
                pass
        self.reset_counts()
        mu.hook_add(unicorn.UC_HOOK_BLOCK, self._on_block)

    def reset_counts(self):
        self.insns = 0
        self.cycles = 0
        self.muls = 0
        self.calls = Counter()
        self.pending_cond = None
        self.executed = set()
        self.per_addr = Counter() if getattr(self, "profiling", False) else None

    def _on_block(self, mu, addr, size, _):
        n, cyc, muls, cond_end, end, addrs = self.img.block(addr, size)
        if self.pending_cond is not None and addr != self.pending_cond:
            self.cycles += 2  # the previous block's conditional branch was taken
        self.pending_cond = end if cond_end else None
        self.insns += n
        self.cycles += cyc
        self.muls += muls
        h = self.img.helpers.get(addr)
        if h:
            self.calls[h] += 1
        self.executed.add((addr, size))
        if self.per_addr is not None:
            for a in addrs:
                self.per_addr[a] += 1

    def call(self, name, *args):
        addr = self.img.symbols[name][0]
        mu = self.mu
        for r, v in zip((A.UC_ARM_REG_R0, A.UC_ARM_REG_R1, A.UC_ARM_REG_R2, A.UC_ARM_REG_R3), args):
            mu.reg_write(r, v & 0xFFFFFFFF)
        mu.reg_write(A.UC_ARM_REG_SP, STACK_TOP)
        mu.reg_write(A.UC_ARM_REG_LR, RETURN_MAGIC | 1)
        self.reset_counts()
        mu.emu_start(addr | 1, RETURN_MAGIC, count=50_000_000)
        if self.pending_cond is not None:
            pass  # the return is not a conditional branch target
        return self.insns, self.cycles, self.muls, Counter(self.calls)

    def paint_stack(self):
        self.mu.mem_write(STACK_TOP - STACK_PAINT, bytes([PAINT]) * STACK_PAINT)

    def stack_used(self):
        data = self.mu.mem_read(STACK_TOP - STACK_PAINT, STACK_PAINT)
        for i, b in enumerate(data):
            if b != PAINT:
                return STACK_PAINT - i
        return 0

    def write_u32s(self, sym, values):
        addr = self.img.symbols[sym][0]
        self.mu.mem_write(addr, b"".join((v & 0xFFFFFFFF).to_bytes(4, "little") for v in values))

    def read_outputs_exact(self, n):
        addr = self.img.symbols["bench_out_buf"][0]
        data = self.mu.mem_read(addr, 32 * n)
        out = []
        for i in range(n):
            rec = data[32 * i : 32 * (i + 1)]
            s, x, ds, rs = (int.from_bytes(rec[k : k + 4], "little", signed=True) for k in (0, 4, 8, 12))
            db = int.from_bytes(rec[16:24], "little", signed=True)
            ratio = int.from_bytes(rec[24:32], "little", signed=True)
            out.append([s, x, ds, db, rs, ratio])
        return out


def function_sizes(img, blocks):
    """Bytes of the functions that contain any of the given (address, size) blocks."""
    funcs = {img.func_of.get(a) for a, _ in blocks} - {None}
    total = 0
    sizes = {}
    for f in funcs:
        sym = img.symbols.get(f)
        if sym:
            sizes[f] = sym[1]
            total += sym[1]
    return total, sizes


def main():
    ap = argparse.ArgumentParser()
    ap.add_argument("elf")
    ap.add_argument("bench")
    ap.add_argument("--core", choices=("m0", "m4"), required=True)
    ap.add_argument("--label", required=True)
    ap.add_argument("--paths", default="direct,cached")
    ap.add_argument("--json")
    ap.add_argument("--profile", metavar="PATH",
                    help="print where PATH's instructions go, per (inlined) source function and line: the ELF "
                         "needs -g (debug information changes no code)")
    a = ap.parse_args()
    bench = json.load(open(a.bench))
    img = Image(a.elf)
    run = Runner(img, a.core)
    run.profiling = bool(a.profile)
    profile = defaultdict(list)  # stream -> [(instructions, address -> executions) per sample]
    paths = [p for p in a.paths.split(",") if f"bench_{p}" in img.symbols]
    result = {"label": a.label, "core": a.core, "streams": {}, "helpers_linked": sorted(set(img.helpers.values()))}
    path_exec = defaultdict(set)
    # The blocks a hit runs (a sample that builds nothing: the per-sample samples at most four times the
    # median, and a block's per-code call) and those a build runs (the other samples, a block's stage).
    hit_exec = defaultdict(set)
    common_exec = defaultdict(set)
    common_count, common_total = Counter(), Counter()
    build_exec = defaultdict(set)
    for stream in bench["streams"]:
        n = len(stream["code"])
        run.write_u32s("bench_code", stream["code"])
        run.write_u32s("bench_temp", stream["temp"])
        base = [run.call("bench_empty", i)[0] for i in range(n)]
        sres = {}
        for p in paths:
            run.call("bench_reset")
            run.paint_stack()
            counts, cycles, muls, calls = [], [], [], Counter()
            extra = {}
            if p == "table" and stream["name"] == "new":
                # A new temperature at every sample builds a table at every sample: its cost is the build
                # (reported on the held and wandering streams), and emulating it would take minutes.
                continue
            if p in ("block", "tblock"):
                # One temperature for the whole stream (a DMA buffer): the stage (or the code table) once,
                # then the block.
                if len(set(stream["temp"])) != 1:
                    continue
                ins, cyc, mul, c = run.call("bench_stage_at" if p == "block" else "bench_table_prime", 0)
                extra = {"stage_insns": ins - base[0], "stage_cycles": cyc, "stage_helper_calls": dict(c)}
                path_exec[p] |= run.executed
                build_exec[p] |= run.executed
                ins, cyc, mul, c = run.call(f"bench_{p}", n)
                hit_exec[p] |= run.executed
                per = (ins - sum(base) / n) / n
                counts = [per] * n
                cycles = [cyc / n] * n
                muls = [mul / n] * n
                calls.update({k: v / n * n for k, v in c.items()})
                path_exec[p] |= run.executed
            sample_exec = []
            for i in range(n if p not in ("block", "tblock") else 0):
                ins, cyc, mul, c = run.call(f"bench_{p}", i)
                counts.append(ins - base[i])
                cycles.append(cyc)
                muls.append(mul)
                calls.update(c)
                path_exec[p] |= run.executed
                sample_exec.append(run.executed)
                if p == a.profile:
                    profile[stream["name"]].append((ins, run.per_addr))
            stack = run.stack_used()
            outs = run.read_outputs_exact(n)
            mismatches = None
            if p in ("direct", "cached", "block", "table", "tblock"):
                want = stream[{"block": "direct", "tblock": "table"}.get(p, p)]
                mismatches = sum(1 for o, w in zip(outs, want) if list(o) != list(w))
                first = next((i for i, (o, w) in enumerate(zip(outs, want)) if list(o) != list(w)), None)
            else:
                first = None
            base_cyc = sum(run.call("bench_empty", i)[1] for i in range(n)) / n
            if p not in ("block", "tblock"):
                # Samples that rebuilt their stage or table (more than four times the median) apart from the
                # others (the hits): what a held temperature costs once the build is paid.
                med = sorted(counts)[n // 2]
                hits = [k for k in counts if k <= 4 * med]
                for k, ex in zip(counts, sample_exec):
                    (hit_exec if k <= 4 * med else build_exec)[p].update(ex)
                # The most common sample at a held or wandering temperature: the set of functions that most
                # samples of the stream enter (a code-table hit, apart from its fallbacks to the stage cache
                # and new temperature codes).
                sets = [frozenset(function_sizes(img, ex)[1]) for ex in sample_exec] if stream["name"] != "new" else []
                mode = Counter(sets).most_common(1)[0][0] if sets else None
                for fs, ex in zip(sets, sample_exec):
                    if fs == mode:
                        common_exec[p].update(ex)
                common_count[p] += sum(1 for fs in sets if fs == mode)
                common_total[p] += len(sets)
                builds = [k for k in counts if k > 4 * med]
                extra["insns_hit_mean"] = sum(hits) / len(hits)
                extra["builds"] = len(builds)
                extra["build_insns_mean"] = sum(builds) / len(builds) if builds else None
            sres[p] = {
                "insns_mean": sum(counts) / n,
                "insns_max": max(counts),
                "insns_min": min(counts),
                "cycles_mean": sum(cycles) / n - base_cyc,
                "muls_mean": sum(muls) / n,
                "helper_calls": {k: v / n for k, v in sorted(calls.items())},
                "stack": stack,
                "mismatches": mismatches,
                "first_mismatch": first,
                "ok": sum(1 for o in outs if o[0] == 0),
                **extra,
            }
        result["streams"][stream["name"]] = sres
    # The code each path runs: every function it entered, its bench_* wrapper included (the evaluator is
    # largely inlined into it), with the bytes actually executed as a lower bound; then a hit's and a build's.
    result["code"] = {}
    for p, blocks in path_exec.items():
        total, sizes = function_sizes(img, blocks)
        insns = set()
        for b in blocks:
            insns.update(img.block(*b)[5])
        executed = sum(img.insn_size(a) for a in insns)
        result["code"][p] = {"functions": total, "executed": executed,
                             "by_function": dict(sorted(sizes.items(), key=lambda kv: -kv[1]))}
        # A hit's code apart (the functions and bytes entered on samples that build nothing), and the build's
        # code (functions entered only by the samples or calls that built a stage or a table).
        hit = hit_exec.get(p, set())
        hit_total, hit_sizes = function_sizes(img, hit)
        hit_insns = set()
        for b in hit:
            hit_insns.update(img.block(*b)[5])
        if common_exec.get(p):
            common_total_b, common_sizes = function_sizes(img, common_exec[p])
            common_insns = set()
            for b in common_exec[p]:
                common_insns.update(img.block(*b)[5])
            result["code"][p]["common"] = {
                "functions": common_total_b, "executed": sum(img.insn_size(a) for a in common_insns),
                "share": common_count[p] / common_total[p],
                "by_function": dict(sorted(common_sizes.items(), key=lambda kv: -kv[1]))}
        build_only = set(function_sizes(img, build_exec.get(p, set()))[1]) - set(hit_sizes)
        result["code"][p]["hit"] = {"functions": hit_total, "executed": sum(img.insn_size(a) for a in hit_insns),
                                    "by_function": dict(sorted(hit_sizes.items(), key=lambda kv: -kv[1]))}
        result["code"][p]["build_only"] = {"functions": sum(img.symbols[f][1] for f in build_only if f in img.symbols),
                                           "names": sorted(build_only)}
    sec = {name: size for name, _, size in img.sections}
    result["flash"] = sec.get(".text", 0) + sec.get(".ARM.exidx", 0) + sec.get(".data", 0)
    # Static RAM of the evaluator: data and bss objects other than the bench's buffers, its stage cache
    # (reported on its own) and newlib's (the naive path's errno and locale state).
    newlib = ("impure", "_impure_ptr", "__global_locale", "errno", "__malloc", "_PathLocale", "__lc_ctype")
    ram = {name: size for name, (addr, size, t) in img.symbols.items()
           if t in "dDbBvV" and addr >= 0x20000000 and not name.startswith("bench_")
           and not any(k in name for k in newlib)}
    result["static_ram"] = sum(ram.values())
    result["static_ram_objects"] = ram
    result["cache_bytes"] = img.symbols.get("bench_cache", (0, 0, ""))[1]
    result["table_bytes"] = img.symbols.get("bench_table_state", (0, 0, ""))[1]
    if a.json:
        json.dump(result, open(a.json, "w"), indent=1)
    if a.profile:
        print_profile(a.elf, profile, {s["name"]: len(s["code"]) for s in bench["streams"]})
    else:
        print(json.dumps(result, indent=1))


def print_profile(elf, per_sample, samples):
    """Instructions per sample by the innermost (inlined) function and by source line, from addr2line; the
    samples that built a stage or table (more than four times the median) are left out."""
    profile = {}
    for name, runs in per_sample.items():
        med = sorted(k for k, _ in runs)[len(runs) // 2]
        kept = [c for k, c in runs if k <= 4 * med]
        samples[name] = len(kept)
        profile[name] = sum(kept, Counter())
    addrs = sorted({x for c in profile.values() for x in c})
    if not addrs:
        print("no samples profiled")
        return
    # Without -i, addr2line names the innermost inlined function of each address and its line.
    where = {}
    lines = tool("arm-none-eabi-addr2line", "-e", elf, "-f", "-C", *[hex(x) for x in addrs]).splitlines()
    for i, x in enumerate(addrs):
        fn, loc = lines[2 * i], lines[2 * i + 1]
        where[x] = (fn, loc.split("/")[-1].split(" ")[0])
    for name, c in profile.items():
        n = samples[name]
        by_fn, by_line = Counter(), Counter()
        for x, k in c.items():
            fn, loc = where[x]
            by_fn[fn] += k
            by_line[(fn, loc)] += k
        total = sum(c.values()) / n
        print(f"== stream {name}: {total:,.0f} instructions per sample (call included) ==")
        for fn, k in by_fn.most_common(25):
            print(f"  {k / n:8.1f}  {fn}")
        print("  -- lines --")
        for (fn, loc), k in by_line.most_common(40):
            print(f"  {k / n:8.1f}  {loc:28s} {fn}")


if __name__ == "__main__":
    main()
