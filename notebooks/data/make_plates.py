"""Generates data/plates_run1.csv and data/plates_run2.csv: INVENTED data for Partita's demo
notebook.

Scenario (invented, not a real study): leaf discs of dwarf bean floated for 24 hours on water,
a sucrose solution or an osmotically matched mannitol solution, then read in a chlorophyll
fluorescence plate reader (Fv/Fm, the maximum quantum yield of photosystem II). The reader
writes one export holding every run so far: run 1 filled 24 wells (8 per solution), run 2
added 24 more. plates_run1.csv is the export after run 1, plates_run2.csv after run 2 (its
first 24 rows are those of run 1). Mannitol lowers Fv/Fm a little; the numbers come from the
seeded model below, so the files are the same on every run:
python3 make_plates.py
"""
import csv
import random

SEED = 20261202
SOLUTIONS = {"water": 0.0, "sucrose": -0.004, "mannitol": -0.022}


def run(rng, number, first_well):
    rows = []
    well = first_well
    for _ in range(8):
        for solution, effect in SOLUTIONS.items():
            well += 1
            value = rng.gauss(0.805 + effect, 0.018)
            rows.append({"well": f"R{number}-{well:02d}", "run": number, "solution": solution,
                         "fvfm": round(min(value, 0.86), 3)})
    return rows


def write(name, rows):
    with open(name, "w", newline="") as f:
        w = csv.DictWriter(f, fieldnames=["well", "run", "solution", "fvfm"])
        w.writeheader()
        w.writerows(rows)


def main():
    rng = random.Random(SEED)
    first = run(rng, 1, 0)
    second = run(rng, 2, 0)
    write("plates_run1.csv", first)
    write("plates_run2.csv", first + second)


if __name__ == "__main__":
    main()
