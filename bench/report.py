#!/usr/bin/env python3
"""Turns rowfold_bench JSON output (medians of repetitions) into the README's markdown tables.

Usage: ./build-bench/bench/rowfold_bench --benchmark_repetitions=5 \
         --benchmark_report_aggregates_only=true --benchmark_out=r.json --benchmark_out_format=json
       python3 bench/report.py r.json
"""
import json
import re
import sys

KS = [2, 4, 8, 16, 32, 64]
BATCH_KS = [4, 8, 16, 64]
TO_NS = {"ns": 1.0, "us": 1e3, "ms": 1e6, "s": 1e9}


def load(path):
    with open(path) as f:
        doc = json.load(f)
    runs = {}
    for b in doc["benchmarks"]:
        if b.get("aggregate_name", "median") != "median":
            continue
        name = re.sub(r"/min_time:[0-9.]+", "", b.get("run_name", b["name"]))
        runs[name] = b
    return doc.get("context", {}), runs


def ns(runs, name):
    b = runs.get(name)
    return None if b is None else b["cpu_time"] * TO_NS[b["time_unit"]]


def fmt(v, digits=1):
    return "—" if v is None else f"{v:.{digits}f}"


def ratio(a, b):
    return None if a is None or b is None or b == 0 else a / b


def best(runs, names):
    vals = [(ns(runs, n), n) for n in names if ns(runs, n) is not None]
    return min(vals) if vals else (None, None)


FORMS = [
    ("NormalEquations", ["base:Rank1Full", "base:Rank1Lower"]),
    ("GivensQr", ["base:PlainGivens", "base:PlainGivensDyn"]),  # Dyn: name used by the first runs
    ("ForgettingRls", ["base:PlainRls", "base:TextbookRls"]),
    ("ForgettingRls:noguard", ["base:PlainRls", "base:TextbookRls"]),  # guard off: like for like
    ("BatchQr", ["base:PlainStore"]),
]


def update_tables(runs, goals):
    out = []
    for est, bases in FORMS:
        out.append(f"\n**{est}** update, ns/sample (ratio = rowfold / best baseline of its form: "
                   f"{', '.join(b[5:] for b in bases)})\n")
        out.append("| K | double fixed | double dyn | best baseline | ratio fixed | ratio dyn "
                   "| float fixed | float dyn | best baseline | ratio fixed | ratio dyn |")
        out.append("|---|---|---|---|---|---|---|---|---|---|---|")
        for k in KS:
            cells = [str(k)]
            for s in ("double", "float"):
                fx = ns(runs, f"update/{est}/{s}/fixed/{k}")
                dy = ns(runs, f"update/{est}/{s}/dyn/{k}")
                bv, bn = best(runs, [f"update/{b}/{s}/{kind}/{k}" for b in bases for kind in ("fixed", "dyn")])
                rf, rd = ratio(fx, bv), ratio(dy, bv)
                label = "" if bn is None else f" ({bn.split('/')[1][5:]}{', dyn' if '/dyn/' in bn else ''})"
                cells += [fmt(fx), fmt(dy), fmt(bv) + label, fmt(rf, 2), fmt(rd, 2)]
                for r in (rf, rd):
                    note(goals, f"{est} update / best baseline of its form", "<=", 1.0, r)
                if est == "GivensQr" and k >= 8:
                    pg = ns(runs, f"update/base:PlainGivens/{s}/fixed/{k}")
                    for v in (fx, dy):
                        note(goals, "GivensQr update / plain Givens (K >= 8)", "<=", 0.5, ratio(v, pg))
            out.append("| " + " | ".join(cells) + " |")
    lam = []
    for est in ("NormalEquations", "GivensQr"):
        row = [f"{est} (lambda 0.999) / (lambda 1)"]
        for k in KS:
            row.append(fmt(ratio(ns(runs, f"update/{est}:lambda/double/fixed/{k}"),
                                 ns(runs, f"update/{est}/double/fixed/{k}")), 2))
        lam.append("| " + " | ".join(row) + " |")
    out.append("\nForgetting on (double, fixed K), ratio of ns/sample:\n")
    out.append("| | " + " | ".join(f"K={k}" for k in KS) + " |")
    out.append("|---|" + "---|" * len(KS))
    out += lam
    return out


def usolve_tables(runs):
    out = ["\nUpdate + solve after every sample, ns/sample (double fixed K; float with dynamic K "
           "against the fixed-size float baselines):\n"]
    pairs = [("NormalEquations", "base:Rank1Lower+LDLT"), ("GivensQr", "base:PlainGivens"),
             ("ForgettingRls", "base:PlainRls")]
    out.append("| K | " + " | ".join(f"{e} | {b[5:]} | ratio" for e, b in pairs) + " |")
    out.append("|---|" + "---|---|---|" * len(pairs))
    for s, kind in (("double", "fixed"), ("float", "dyn")):
        for k in KS:
            cells = [f"{k} ({s})"]
            for e, b in pairs:
                v, bv = ns(runs, f"usolve/{e}/{s}/{kind}/{k}"), ns(runs, f"usolve/{b}/{s}/fixed/{k}")
                cells += [fmt(v), fmt(bv), fmt(ratio(v, bv), 2)]
            out.append("| " + " | ".join(cells) + " |")
    out.append("\nRefit on 1000 rows after every sample, µs/sample (double):\n")
    out.append("| K | BatchQr add+solve | HouseholderQR sliding window | ratio |")
    out.append("|---|---|---|---|")
    for k in (2, 4, 8):
        v = ns(runs, f"usolve/BatchQr/double/fixed/{k}/rows:1000")
        bv = ns(runs, f"usolve/base:WindowHouseholderQR/double/fixed/{k}/rows:1000")
        out.append(f"| {k} | {fmt(None if v is None else v / 1e3)} | {fmt(None if bv is None else bv / 1e3)} "
                   f"| {fmt(ratio(v, bv), 2)} |")
    return out


def query_tables(runs):
    out = ["\nQueries alone on 1000 samples, µs (double, dynamic K; BatchQr holds the 1000 rows):\n"]
    ests = ["NormalEquations", "GivensQr", "ForgettingRls", "BatchQr"]
    out.append("| K | " + " | ".join(f"{e} solve | {e} summary" for e in ests) + " |")
    out.append("|---|" + "---|---|" * len(ests))
    for k in KS:
        cells = [str(k)]
        for e in ests:
            sfx = "/rows:1000" if e == "BatchQr" else ""
            for q in ("solve", "summary"):
                v = ns(runs, f"{q}/{e}/double/dyn/{k}{sfx}")
                cells.append(fmt(None if v is None else v / 1e3, 2))
        out.append("| " + " | ".join(cells) + " |")
    rows = []
    for n in (100, 1000, 10000, 100000):
        v = ns(runs, f"solve/BatchQr/double/dyn/8/rows:{n}")
        rows.append(f"{n} rows: {fmt(None if v is None else v / 1e3, 1)} µs")
    out.append("\nBatchQr solve at K = 8: " + ", ".join(rows) + ".")
    return out


def batch_tables(runs, goals):
    names = [n for n in runs if n.startswith("batch/")]
    if not names:
        return []
    rows_tag = names[0].rsplit("/", 1)[1]
    methods = ["NormalEquations", "GivensQr", "ForgettingRls", "BatchQr:store", "BatchQr",
               "base:HouseholderQR", "base:ColPivHouseholderQR", "base:NormalLDLT", "base:dgels"]
    out = [f"\nBatch ingestion, double, {rows_tag.replace('rows:', 'n = ')}, caches evicted before every pass: "
           "M rows/s (fraction of the bandwidth bound / of the flop bound). rowfold rows include "
           "the solve except `BatchQr:store`.\n"]
    out.append("| method | " + " | ".join(f"K={k}" for k in BATCH_KS) + " |")
    out.append("|---|" + "---|" * len(BATCH_KS))
    rate = {}
    for m in methods:
        cells = [m]
        for k in BATCH_KS:
            b = runs.get(f"batch/{m}/double/fixed/{k}/{rows_tag}")
            if b is None:
                cells.append("—")
                continue
            rate[(m, k)] = b["rows/s"]
            cells.append(f"{b['rows/s'] / 1e6:.2f} ({b.get('bw_frac', 0):.2f} / {b.get('flop_frac', 0):.3f})")
            if m == "NormalEquations" and k <= 16:
                note(goals, "NormalEquations addRows, fraction of bandwidth bound (K <= 16)", ">=", 0.5,
                     b.get("bw_frac"))
        out.append("| " + " | ".join(cells) + " |")
    out.append("\nSpeed-up of block ingestion (rows/s ratio, higher is better):\n")
    out.append("| ratio | " + " | ".join(f"K={k}" for k in BATCH_KS) + " |")
    out.append("|---|" + "---|" * len(BATCH_KS))
    for m in ("GivensQr", "BatchQr"):
        for base, need in (("base:HouseholderQR", 3.0), ("base:dgels", 5.0)):
            cells = [f"{m} / {base[5:]}"]
            for k in BATCH_KS:
                r = ratio(rate.get((m, k)), rate.get((base, k)))
                cells.append(fmt(r, 2))
                if k >= 8:
                    note(goals, f"GivensQr/BatchQr ingestion rows/s / {base[5:]} (K = 8..64)", ">=", need, r)
            out.append("| " + " | ".join(cells) + " |")
    return out


def note(goals, name, cmp, limit, value):
    if value is not None:
        goals.setdefault((name, cmp, limit), []).append(value)


def goal_table(goals):
    out = ["\n| goal | met | measured (worst .. best) | cases within |", "|---|---|---|---|"]
    for (name, cmp, limit), vs in goals.items():
        ok = [v <= limit if cmp == "<=" else v >= limit for v in vs]
        worst, bestv = (max(vs), min(vs)) if cmp == "<=" else (min(vs), max(vs))
        out.append(f"| {name} {cmp} {limit:g} | {'met' if all(ok) else 'NOT met'} | {worst:.2f} .. {bestv:.2f} "
                   f"| {sum(ok)}/{len(ok)} |")
    return out


def main():
    ctx, runs = load(sys.argv[1])
    lines = [f"Context: {ctx.get('rowfold_flags', '?')}; {ctx.get('rowfold_compiler', '?')}; "
             f"peak {ctx.get('rowfold_fma_peak', '?')}; DRAM read {ctx.get('rowfold_dram_read', '?')}; "
             f"load average {', '.join(f'{x:.1f}' for x in ctx.get('load_avg', []))}."]
    goals = {}
    lines += update_tables(runs, goals)
    lines += usolve_tables(runs)
    lines += query_tables(runs)
    lines += batch_tables(runs, goals)
    lines += goal_table(goals)
    print("\n".join(lines))


if __name__ == "__main__":
    main()
