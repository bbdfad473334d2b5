"""Generates data/snails.csv: INVENTED data for Partita's demo notebook.

Scenario (invented, not a real study): 36 juvenile garden snails are raised for four weeks in
six boxes, each box given one of three feeds (lettuce, carrot, pellet). The response is body
weight in grams at the end. The numbers come from a seeded normal model below, so the file is
the same on every run: python3 make_snails.py
"""
import csv
import random

SEED = 20261201
MEANS = {"lettuce": 4.1, "carrot": 4.6, "pellet": 5.3}
SD = 0.55


def main():
    rng = random.Random(SEED)
    rows = []
    snail = 0
    for box in range(1, 7):
        feed = list(MEANS)[(box - 1) % 3]
        for _ in range(6):
            snail += 1
            w = round(rng.gauss(MEANS[feed], SD), 2)
            rows.append({"snail": f"S{snail:02d}", "box": box, "feed": feed, "weight": w})
    # Two snails escaped before weighing: their weights are missing.
    rows[7]["weight"] = "NA"
    rows[29]["weight"] = ""
    with open("snails.csv", "w", newline="") as f:
        f.write("")
        w = csv.DictWriter(f, fieldnames=["snail", "box", "feed", "weight"])
        w.writeheader()
        w.writerows(rows)


if __name__ == "__main__":
    main()
