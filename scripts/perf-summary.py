#!/usr/bin/env python3
"""Headline numbers of a generated performance report (docs/performance-latest.md).

    python3 scripts/perf-summary.py REPORT.md    # prints a Markdown "Summary" section

Reads the sections `scripts/perf-report` wrote and computes the ratios and targets that
docs/performance.md discusses. A value whose section is missing (short mode without the
reference comparisons, or a failed section) is shown as "not measured".
"""

import re
import sys


def sections(text):
    out = {}
    for part in re.split(r"^## ", text, flags=re.M)[1:]:
        title, _, body = part.partition("\n")
        out[title.strip()] = body
    return out


def find(body, pattern, cast=float):
    m = re.search(pattern, body or "", flags=re.M)
    return cast(m.group(1)) if m else None


def fmt(v, spec, unit=""):
    return "not measured" if v is None else f"{v:{spec}}{unit}"


def ratio(a, b):
    return None if a is None or b is None or b == 0 else a / b


def main():
    if len(sys.argv) != 2:
        print(__doc__, file=sys.stderr)
        return 2
    s = sections(open(sys.argv[1], encoding="utf-8").read())
    loop = s.get("Kinematics (timing loop)")
    pin = s.get("Against Pinocchio (C++, FK and Jacobian)")
    # Median thread-CPU time per call, as docs/performance.md compares them.
    cpu = r"cpu median +([0-9.]+) ns"
    fk = find(loop, r"^clamber fk/sevenfold .*?" + cpu)
    fkj = find(loop, r"^clamber fk_jacobian/sevenfold .*?" + cpu)
    pin_fk = find(pin, r"^pinocchio framesForwardKinematics .*?" + cpu)
    pin_fkj = find(pin, r"^pinocchio computeJointJacobians\+updateFramePlacement\+getFrameJ\. .*?" + cpu)
    k = s.get("Against the k crate (IK)")
    k_ratio = find(k, r"^δ 0\.05: median time Clamber / k \(multiplier 1\) = ([0-9.]+)")
    proj = s.get("Projection (timing loop)")
    proj_median = find(proj, r"^projection/sevenfold/0\.05: median ([0-9.]+) ns")
    crit = s.get("Projection (criterion, success and iterations)")
    proj_success = find(crit, r"^projection/sevenfold/0\.05: .*success ([0-9.]+) %")
    # criterion's estimate (the middle of its interval), in µs
    proj_crit = find(crit, r"^projection/sevenfold/0\.05\n +time: +\[[0-9.]+ µs ([0-9.]+) µs")
    toppra = s.get("Against toppra (path timing)")
    toppra_diffs = [float(x) for x in re.findall(r"^ok .*?, diff ([0-9.]+) %", toppra or "", re.M)]
    toppra_failed = "FAIL" in (toppra or "")
    routes = s.get("Routes")
    corridor = re.search(r"^corridor 10, feedback on +(\d+)/(\d+) +median +([0-9.]+) s +p95 +([0-9.]+) s",
                         routes or "", re.M)
    per_switch = re.findall(r"^corridor (\d+), feedback on .*s/switch +([0-9.]+)", routes or "", re.M)
    scen = s.get("Single-stance scenarios")
    door = re.search(r"^\| door \| LazyPrm \| (\d+)/(\d+) \| ([0-9.]+) ms \| ([0-9.]+) ms \| ([0-9.]+) ms",
                     scen or "", re.M)
    scenario_rows = re.findall(r"^\| (\w+) \| (RrtConnect|LazyPrm) \| (\d+)/(\d+) \| ([0-9.]+) ms",
                               scen or "", re.M)
    cores = s.get("Scaling with cores (clamber bench, 1 and 2 jobs)")
    rounds = re.findall(r"^\| ([12]) \| ([12]) \| ([0-9.]+) s \| [0-9]+% \| (\d+) \| (yes|NO) \|",
                        cores or "", re.M)
    mem = s.get("Peak memory")
    peaks = [float(x) for x in re.findall(r"^\| `[^`]+` \| ([0-9.]+) MB", mem or "", re.M)]

    rows = [
        ("FK, 7-DOF arm: Clamber / Pinocchio (`framesForwardKinematics`)",
         f"{fmt(fk, '.1f', ' ns')} / {fmt(pin_fk, '.1f', ' ns')} = {fmt(ratio(fk, pin_fk), '.2f')}"),
        ("FK + grip Jacobian: Clamber / Pinocchio (fastest path)",
         f"{fmt(fkj, '.1f', ' ns')} / {fmt(pin_fkj, '.1f', ' ns')} = {fmt(ratio(fkj, pin_fkj), '.2f')}"),
        ("Projection at 0.05 rad: criterion estimate, timing-loop median, success",
         f"{fmt(proj_crit, '.3f', ' µs')}, {fmt(proj_median, '.0f', ' ns')}, "
         f"{fmt(proj_success, '.2f', ' %')}"),
        ("Projection / `k` crate IK, median time at 0.05 rad", fmt(k_ratio, ".3f")),
        ("Path timing vs toppra: largest duration difference",
         "not measured" if not toppra_diffs and not toppra_failed
         else ("FAILED" if toppra_failed else f"{max(toppra_diffs):.4f} % over {len(toppra_diffs)} paths")),
    ]
    if corridor:
        ok, n, med, p95 = corridor.groups()
        rows.append(("Route, 10-bar corridor: success, median, p95", f"{ok}/{n}, {med} s, {p95} s"))
    else:
        rows.append(("Route, 10-bar corridor", "not measured"))
    if per_switch:
        rows.append(("Route time per switch (bars: seconds)",
                     ", ".join(f"{b}: {t} s" for b, t in sorted(per_switch, key=lambda x: int(x[0])))))
    if door:
        ok, n, med, p95, pipe = door.groups()
        rows.append(("Door, lazy PRM (default): success, planning median / p95, pipeline median "
                     "(target <= 50 ms, 100/100)", f"{ok}/{n}, {med} / {p95} ms, {pipe} ms"))
    else:
        rows.append(("Door", "not measured"))
    if scenario_rows:
        rows.append(("Single-stance success (scenario planner: successes, planning median)",
                     "; ".join(f"{sc} {'RRT' if p == 'RrtConnect' else 'PRM'} {ok}/{n} {med} ms"
                               for sc, p, ok, n, med in scenario_rows)))
    one = [float(t) for j, r, t, _, _ in rounds if j == "1"]
    two = [float(t) for j, r, t, _, _ in rounds if j == "2"]
    if one and two:
        same = all(x == "yes" for *_, x in rounds)
        rows.append(("`clamber bench`, 2 jobs vs 1: speed-up, same route digests",
                     f"{sum(one) / sum(two):.2f}x, {'yes' if same else 'NO'}"))
    else:
        rows.append(("Scaling with cores", "not measured"))
    rows.append(("Peak memory, largest run", f"{max(peaks):.1f} MB" if peaks else "not measured"))

    print("## Summary")
    print()
    print("Computed by `scripts/perf-summary.py` from the sections below.")
    print()
    print("| measure | value |")
    print("|---|---|")
    for name, value in rows:
        print(f"| {name} | {value} |")
    print()
    return 0


if __name__ == "__main__":
    sys.exit(main())
