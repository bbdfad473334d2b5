"""Generates data/seedlings.csv: INVENTED data for Partita's demo notebook.

Scenario (invented, not a real study): 30 tomato seedlings are grown under three shade nets
(none, light, dense; 11, 10 and 9 plants — a few seedlings were lost at potting). Each plant's
leaf chlorophyll index is read once a week for four weeks, so week is a within-plant factor and
shade a between-plant one. The file comes in the wide layout an instrument log often has: one
column per week. Plants differ in vigour (a random plant effect) and week-to-week readings of a
plant drift together (an autoregressive error), so the repeated measures are not spherical.
One reading (plant T17, week 3) failed and is empty. The numbers come from the seeded model
below, so the file is the same on every run: python3 make_seedlings.py
"""
import csv
import random

SEED = 20261202
SHADES = {"none": 11, "light": 10, "dense": 9}
# Mean chlorophyll index per shade and week (invented).
MEANS = {
    "none": [31.0, 34.5, 37.5, 40.0],
    "light": [31.0, 35.0, 38.5, 41.5],
    "dense": [30.5, 33.0, 34.5, 35.5],
}
PLANT_SD = 2.2
NOISE_SD = 1.4
RHO = 0.9


def main():
    rng = random.Random(SEED)
    rows = []
    plant = 0
    for shade, n in SHADES.items():
        for _ in range(n):
            plant += 1
            vigour = rng.gauss(0.0, PLANT_SD)
            e = rng.gauss(0.0, NOISE_SD)
            row = {"plant": f"T{plant:02d}", "shade": shade}
            for week in range(4):
                if week > 0:
                    # Readings drift together, and the scatter grows as the plants grow.
                    e = RHO * e + rng.gauss(0.0, NOISE_SD * week)
                row[f"week{week + 1}"] = round(MEANS[shade][week] + vigour + e, 1)
            rows.append(row)
    rows[16]["week3"] = ""
    with open("seedlings.csv", "w", newline="") as f:
        w = csv.DictWriter(f, fieldnames=["plant", "shade", "week1", "week2", "week3", "week4"])
        w.writeheader()
        w.writerows(rows)


if __name__ == "__main__":
    main()
