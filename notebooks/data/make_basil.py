"""Generates data/basil.csv: INVENTED data for Partita's demo notebook.

Scenario (invented, not a real study): potted basil grown for five weeks under four LED light
recipes (white, red-blue, far-red, blue-rich) crossed with three nitrogen feeds (low, medium,
high), eight pots per combination planned. Some pots were lost to damping-off, so the cells are
unequal (5 to 8 pots). The response is shoot fresh weight in grams. Red-blue light and more
nitrogen help, and they help more together (an interaction); scatter grows with weight. The
numbers come from the seeded model below, so the file is the same on every run:
python3 make_basil.py
"""
import csv
import random

SEED = 20261203
LIGHTS = {"white": 0.0, "red-blue": 3.0, "far-red": -1.0, "blue-rich": 1.5}
NITROGEN = {"low": 0.0, "medium": 2.5, "high": 3.5}


def main():
    rng = random.Random(SEED)
    rows = []
    pot = 0
    for light, l_eff in LIGHTS.items():
        for nitrogen, n_eff in NITROGEN.items():
            lost = rng.choice([0, 0, 1, 2, 3])
            for _ in range(8 - lost):
                pot += 1
                mean = 18.0 + l_eff + n_eff + 0.4 * l_eff * n_eff / 3.5
                weight = rng.gauss(mean, 0.08 * mean)
                rows.append({"pot": f"B{pot:03d}", "light": light, "nitrogen": nitrogen,
                             "fresh_weight": round(weight, 2)})
    with open("basil.csv", "w", newline="") as f:
        w = csv.DictWriter(f, fieldnames=["pot", "light", "nitrogen", "fresh_weight"])
        w.writeheader()
        w.writerows(rows)


if __name__ == "__main__":
    main()
