"""Where a mapped driver's standardised errors sit: the pots of one or more mapped studies grouped by their
distance to an opening, with the mean squared standardised error, the RMS error and the RMS SE of each group.

Reads only potclim's outputs and the simulator's truth (Python standard library, no potclim code):
    potclim simulate tests/scenarios/sharp_draught.toml --out /tmp/sd-1 --seed 1
    potclim ingest /tmp/sd-1/study.toml && potclim map /tmp/sd-1/study.toml
    python3 tests/scenarios/map_by_distance.py /tmp/sd-1 [/tmp/sd-2 ...]

Options (before the folders): --driver NAME (default night_cold_hours), --opening NAME (default door),
--edges 1,2,4 (group edges in metres). The numbers of docs/spatial.md, "The spread over the decay
lengths", came from seeds 1-10 of sharp_draught.toml with the default options.
"""
import csv
import math
import sys


def table(path, key="pot"):
    with open(path, newline="") as f:
        return {r[key]: r for r in csv.DictReader(f)}


def main(argv):
    driver, opening, edges, folders = "night_cold_hours", "door", [1.0, 2.0, 4.0], []
    it = iter(argv)
    for a in it:
        if a == "--driver":
            driver = next(it)
        elif a == "--opening":
            opening = next(it)
        elif a == "--edges":
            edges = sorted(float(x) for x in next(it).split(","))
        else:
            folders.append(a)
    if not folders:
        sys.exit(__doc__)
    groups = {}
    for d in folders:
        truth = table(f"{d}/truth/pots.csv")
        mapped = table(f"{d}/output/pot_covariates.csv")
        for pot, t in truth.items():
            m = mapped[pot]
            err = float(m[driver]) - float(t[driver])
            se = float(m[f"{driver}_se"])
            z2 = 0.0 if err == 0.0 else (err / se) ** 2
            dist = float(m[f"distance_{opening}"])
            k = sum(dist >= e for e in edges)
            groups.setdefault(k, []).append((z2, err * err, se * se))
    bounds = [0.0] + edges + [math.inf]
    for k in sorted(groups):
        g = groups[k]
        n = len(g)
        print(
            f"{bounds[k]:g}-{bounds[k + 1]:g} m: {n} pots, mean z2 {sum(x[0] for x in g) / n:.2f}, "
            f"RMS error {math.sqrt(sum(x[1] for x in g) / n):.2f}, RMS SE {math.sqrt(sum(x[2] for x in g) / n):.2f}"
        )


if __name__ == "__main__":
    main(sys.argv[1:])
