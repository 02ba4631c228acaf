#!/usr/bin/env python3
"""Write stet's demo data sets. Every value in them is INVENTED.

Nothing here was measured: the numbers come from a seeded pseudo-random
generator and made-up rules, chosen so that the examples have a shape worth
fitting. Do not read anything about real bees or real greenhouses into them.

Two scenarios:

hives.csv (classification)
    A beekeeper with three apiaries (orchard, meadow, ridge) has a sensor
    board in each of 80 hives and notes every week whether the colony is
    healthy, queenless or preparing to swarm. The invented rules:
    - swarming: the colony hums at a high pitch (sound_hz > 262) AND the hive
      is losing weight (daily_weight_change_kg < -0.25);
    - otherwise queenless: the brood temperature has drifted more than 1.5 C
      from 35 C, in either direction (a band, which no straight line splits);
    - otherwise healthy.
    Then 3 % of the labels are replaced by another class at random, as a
    tired beekeeper might.

greenhouse.csv (regression)
    Benches of tomato, cucumber and lettuce in a greenhouse; each row is one
    bench on one day and the litres of water it was given. The invented law:
    water rises with light but saturates, rises quadratically with air
    temperature above 16 C, falls with humidity, rises with plant age but
    saturates, and is scaled by a crop factor; then 5 % multiplicative and
    0.2 L additive noise.

hives-new.csv and greenhouse-new.csv hold ten further rows from the same
scenarios without the target column, for a prediction step.

hives-week7.csv holds 40 readings of week 7 with the status the beekeeper
noted on inspection (same rule, same label noise): a labelled batch, so a
prediction step can check the model on rows it has never seen.

Run from anywhere with Python 3 (standard library only):
    python3 demo-data/generate.py
It rewrites the five CSV files beside this script, byte for byte the same on
every run: the generators are seeded and the output is written with "\\n"
line ends.
"""

import csv
import math
import random
from pathlib import Path

HERE = Path(__file__).resolve().parent

HIVES_SEED = 20240611
GREENHOUSE_SEED = 20240612

SITES = ["orchard", "meadow", "ridge"]
# Invented site effects: (humidity offset %, typical hive weight kg).
SITE_EFFECTS = {"orchard": (0.0, 42.0), "meadow": (8.0, 38.0), "ridge": (-6.0, 34.0)}
CLASSES = ["healthy", "queenless", "swarming"]


def hive_status(temp_c, sound_hz, change_kg):
    """The invented rule behind the hive labels, before label noise."""
    if sound_hz > 262 and change_kg < -0.25:
        return "swarming"
    if abs(temp_c - 35.0) > 1.5:
        return "queenless"
    return "healthy"


def hive_reading(rng, site):
    """One weekly sensor reading of a hive at `site`, rounded as a sensor board would."""
    humidity_offset, weight_mean = SITE_EFFECTS[site]
    # Hidden moods make the rule's regions well populated; the label still
    # follows hive_status alone. A fifth of readings come from restless
    # colonies (higher hum, falling weight), a fifth from colonies whose brood
    # temperature drifts, the rest hold it near 35 C.
    mood = rng.random()
    if mood < 0.2:
        sound = rng.gauss(290.0, 15.0)
        change = rng.gauss(-0.60, 0.20)
    else:
        sound = rng.gauss(230.0, 15.0)
        change = rng.gauss(0.10, 0.20)
    if 0.2 <= mood < 0.4:
        temp = 35.0 + rng.choice([-1.0, 1.0]) * rng.uniform(1.2, 4.0)
    else:
        temp = rng.gauss(35.0, 0.6)
    return {
        "site": site,
        "temp_c": round(temp, 1),
        "humidity_pct": round(min(95.0, max(30.0, rng.gauss(60.0 + humidity_offset, 6.0))), 1),
        "weight_kg": round(max(12.0, rng.gauss(weight_mean, 6.0)), 1),
        "sound_hz": round(sound),
        "daily_weight_change_kg": round(change, 2),
    }


def labelled_hive_reading(rng, hive, site, week):
    """A reading with the status noted for it: the rule, then 3 % label noise."""
    row = {"hive": hive, "week": week, **hive_reading(rng, site)}
    status = hive_status(row["temp_c"], row["sound_hz"], row["daily_weight_change_kg"])
    if rng.random() < 0.03:
        status = rng.choice([c for c in CLASSES if c != status])
    row["status"] = status
    return row


def hives(rng):
    """400 labelled readings (80 hives, 5 weeks), 10 new unlabelled ones (week 6)
    and 40 labelled ones (week 7), drawn in that order so earlier files never move."""
    hive_sites = [(f"H{n:02d}", SITES[(n - 1) % 3]) for n in range(1, 81)]
    rows = []
    for week in range(1, 6):
        for hive, site in hive_sites:
            rows.append(labelled_hive_reading(rng, hive, site, week))
    new_rows = []
    for hive, site in rng.sample(hive_sites, 10):
        new_rows.append({"hive": hive, "week": 6, **hive_reading(rng, site)})
    week7 = [labelled_hive_reading(rng, hive, site, 7) for hive, site in rng.sample(hive_sites, 40)]
    return rows, new_rows, week7


CROP_FACTOR = {"tomato": 1.2, "cucumber": 1.5, "lettuce": 0.6}


def water_litres(crop, air_temp_c, light_klux, humidity_pct, plant_age_days):
    """The invented law behind the greenhouse target, before noise."""
    light = 2.0 + 8.0 * (1.0 - math.exp(-light_klux / 20.0))
    heat = 1.0 + 0.003 * (air_temp_c - 16.0) ** 2
    dryness = 1.3 - 0.006 * humidity_pct
    growth = 0.4 + 0.6 * plant_age_days / (plant_age_days + 25.0)
    return CROP_FACTOR[crop] * light * heat * dryness * growth


def greenhouse_conditions(rng, bench, crop):
    return {
        "bench": bench,
        "crop": crop,
        "air_temp_c": round(rng.uniform(16.0, 34.0), 1),
        "light_klux": round(rng.uniform(5.0, 60.0), 1),
        "humidity_pct": round(rng.uniform(40.0, 90.0), 1),
        "plant_age_days": rng.randint(5, 90),
    }


def greenhouse(rng):
    """300 bench-days with the water given, and 10 new bench-days without it."""
    crops = list(CROP_FACTOR)
    benches = [(f"B{n:02d}", crops[(n - 1) % 3]) for n in range(1, 25)]
    rows = []
    for _ in range(300):
        bench, crop = rng.choice(benches)
        row = greenhouse_conditions(rng, bench, crop)
        clean = water_litres(
            crop, row["air_temp_c"], row["light_klux"], row["humidity_pct"], row["plant_age_days"]
        )
        noisy = clean * (1.0 + rng.gauss(0.0, 0.05)) + rng.gauss(0.0, 0.2)
        row["water_l"] = round(max(0.1, noisy), 2)
        rows.append(row)
    new_rows = [greenhouse_conditions(rng, *rng.choice(benches)) for _ in range(10)]
    return rows, new_rows


def write_csv(name, rows):
    with open(HERE / name, "w", newline="", encoding="utf-8") as f:
        writer = csv.DictWriter(f, fieldnames=list(rows[0]), lineterminator="\n")
        writer.writeheader()
        writer.writerows(rows)


def main():
    hive_rows, hive_new, hive_week7 = hives(random.Random(HIVES_SEED))
    write_csv("hives.csv", hive_rows)
    write_csv("hives-new.csv", hive_new)
    write_csv("hives-week7.csv", hive_week7)
    green_rows, green_new = greenhouse(random.Random(GREENHOUSE_SEED))
    write_csv("greenhouse.csv", green_rows)
    write_csv("greenhouse-new.csv", green_new)


if __name__ == "__main__":
    main()
