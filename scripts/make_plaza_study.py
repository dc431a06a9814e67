"""Write the invented sample set ``sample_sets/plaza_study/``.

Everything it writes is invented: the town square (Tallow Square in the fictional town of
Wickerby), the study, its 1,200 participants (known only by codes), the photographs (which do
not exist; ``image_file`` paths are illustrative), and the six annotators, known only by tree
names. Participants agreed to be photographed for a study of how people use the square, and
each gave an age band and a gender themselves, with consent to their use in checking the labels
for bias; some chose not to give a gender (left blank). A numpy ``Generator`` with a fixed seed
drives every choice, so running the script again rewrites the same bytes::

    python scripts/make_plaza_study.py [--out DIR]

Each photograph shows one participant; three of the six annotators tag what the person is doing,
one tag each. What is planted, so ``labelreview queue`` has something to find:

1. **Disparity**: ``loitering`` (a judgement of intent, not something a photo shows, and not in
   the shipped lexicon) is given to people aged 16-24 far more often than to anyone else doing
   the same thing (standing, sitting or waiting).
2. **Contested**: ``waiting`` is hard to tell from ``standing`` and ``resting``; annotators split.
3. **Annotator skew**: ``rowan`` tags people at rest as ``idle`` about a third of the time; the
   others almost never do.
4. **Proxy column**: ``camera_zone`` follows the age band closely (the skate ramp camera sees
   mostly the young, the bench row camera mostly the old).
5. **A real difference**: ``skateboarding`` is given more to the young because the photos show
   it (it happens at the skate ramp). The queue flags it too; a curator accepts it with that
   reason. A disparity is a signal to investigate, not proof of bias.

Nothing is planted for ``gender``; ``weather``, ``device`` and ``hour`` are unrelated to
everything. Two participants are aged 85+ (fewer than k = 10 items), so that group is never shown.
"""

from __future__ import annotations

import argparse
import csv
from pathlib import Path

import numpy as np

SEED = 20261203
N_PHOTOS = 1200
PER_PHOTO = 3
OUT_DIR = Path(__file__).resolve().parents[1] / "sample_sets" / "plaza_study"

ANNOTATORS = ("alder", "birch", "hazel", "larch", "rowan", "willow")
SKEWED = "rowan"

AGE_BANDS = ("16-24", "25-44", "45-64", "65-84")
AGE_SHARES = (0.22, 0.30, 0.26, 0.22)
OLDEST = "85+"
N_OLDEST = 2
GENDERS = ("woman", "man", "non-binary", "")
GENDER_SHARES = (0.47, 0.47, 0.03, 0.03)

ZONES = ("skate_ramp", "bus_shelter", "market_stalls", "fountain", "playground_gate", "bench_row")
# Probability of each camera zone per age band (rows follow AGE_BANDS, then 85+): the proxy.
ZONE_BY_AGE = {
    "16-24": (0.70, 0.20, 0.04, 0.03, 0.02, 0.01),
    "25-44": (0.04, 0.15, 0.35, 0.10, 0.32, 0.04),
    "45-64": (0.01, 0.10, 0.50, 0.25, 0.06, 0.08),
    "65-84": (0.0, 0.05, 0.10, 0.15, 0.02, 0.68),
    "85+": (0.0, 0.0, 0.0, 0.3, 0.0, 0.7),
}
WEATHER = ("sunny", "cloudy", "rain")
DEVICES = ("cam_north", "cam_south")

# What people are really doing (the same for every age band, except skateboarding).
ACTIVITIES = (
    "sitting",
    "standing",
    "walking",
    "waiting",
    "resting",
    "chatting",
    "eating",
    "reading",
    "using_phone",
    "exercising",
    "playing",
    "cycling",
    "feeding_birds",
    "skateboarding",
)
ACTIVITY_SHARES = (
    0.13,
    0.12,
    0.14,
    0.08,
    0.07,
    0.09,
    0.06,
    0.05,
    0.08,
    0.04,
    0.04,
    0.04,
    0.03,
    0.03,
)
AT_REST = ("sitting", "standing", "waiting", "resting")
TAXONOMY = (*ACTIVITIES, "loitering", "idle", "suspicious")
ACCURACY = 0.9

LOITERING_YOUNG = 0.30
LOITERING_OTHERS = 0.04
IDLE_SKEWED = 0.35
IDLE_OTHERS = 0.015
SUSPICIOUS = 0.006


def _participants(rng: np.random.Generator) -> list[dict[str, str]]:
    n_main = N_PHOTOS - N_OLDEST
    ages = list(rng.choice(AGE_BANDS, size=n_main, p=AGE_SHARES)) + [OLDEST] * N_OLDEST
    order = rng.permutation(N_PHOTOS)
    ages = [ages[i] for i in order]
    genders = rng.choice(GENDERS, size=N_PHOTOS, p=GENDER_SHARES)
    people = []
    for i in range(N_PHOTOS):
        age = str(ages[i])
        zone = str(rng.choice(ZONES, p=ZONE_BY_AGE[age]))
        if zone == "skate_ramp" and rng.random() < 0.6:
            activity = "skateboarding"
        else:
            activity = str(rng.choice(ACTIVITIES[:-1], p=_renorm(ACTIVITY_SHARES[:-1])))
        people.append(
            {
                "photo_id": f"tq{i + 1:04d}",
                "image_file": f"photos/tq{i + 1:04d}.jpg",
                "participant": f"P{rng.integers(10_000, 99_999)}-{i + 1:04d}",
                "age_band": age,
                "gender": str(genders[i]),
                "camera_zone": zone,
                "weather": str(rng.choice(WEATHER, p=(0.5, 0.35, 0.15))),
                "device": str(rng.choice(DEVICES)),
                "hour": str(int(rng.integers(8, 21))),
                "truth": activity,
            }
        )
    return people


def _renorm(shares: tuple[float, ...]) -> list[float]:
    total = sum(shares)
    return [s / total for s in shares]


def _tag(rng: np.random.Generator, annotator: str, person: dict[str, str]) -> str:
    truth = person["truth"]
    if truth in AT_REST:
        loiter = LOITERING_YOUNG if person["age_band"] == "16-24" else LOITERING_OTHERS
        if rng.random() < loiter:
            return "loitering"
        idle = IDLE_SKEWED if annotator == SKEWED else IDLE_OTHERS
        if rng.random() < idle:
            return "idle"
    if rng.random() < SUSPICIOUS:
        return "suspicious"
    if truth == "waiting":
        return str(rng.choice(("waiting", "standing", "resting"), p=(0.45, 0.35, 0.20)))
    if truth == "standing" and rng.random() < 0.15:
        return "waiting"
    if rng.random() < ACCURACY:
        return truth
    return str(rng.choice(ACTIVITIES))


def write(out_dir: Path) -> None:
    """Write items.csv, annotations.csv and taxonomy.txt into ``out_dir``."""
    rng = np.random.default_rng(SEED)
    people = _participants(rng)
    out_dir.mkdir(parents=True, exist_ok=True)
    item_columns = (
        "photo_id",
        "image_file",
        "participant",
        "age_band",
        "gender",
        "camera_zone",
        "weather",
        "device",
        "hour",
    )
    with open(out_dir / "items.csv", "w", encoding="utf-8", newline="") as handle:
        writer = csv.writer(handle, lineterminator="\n")
        writer.writerow(item_columns)
        for person in people:
            writer.writerow([person[c] for c in item_columns])
    with open(out_dir / "annotations.csv", "w", encoding="utf-8", newline="") as handle:
        writer = csv.writer(handle, lineterminator="\n")
        writer.writerow(("photo_id", "annotator", "activity"))
        for person in people:
            chosen = rng.choice(ANNOTATORS, size=PER_PHOTO, replace=False)
            for annotator in sorted(str(a) for a in chosen):
                writer.writerow((person["photo_id"], annotator, _tag(rng, annotator, person)))
    (out_dir / "taxonomy.txt").write_text("\n".join(TAXONOMY) + "\n", encoding="utf-8")


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--out", type=Path, default=OUT_DIR, help="folder to write into")
    args = parser.parse_args()
    write(args.out)
    print(f"wrote {N_PHOTOS} photos and {N_PHOTOS * PER_PHOTO} annotations to {args.out}")


if __name__ == "__main__":
    main()
