"""Write the invented sample set ``sample_sets/harbour_archive/``.

Everything it writes is invented: the town of Skellmouth, its streets, the photographs (which do
not exist; ``image_file`` paths are illustrative), the captions, the tag scheme and the nine
volunteers, who are known only by bird nicknames. A numpy ``Generator`` with a fixed seed drives
every choice, so running the script again rewrites the same bytes::

    /work/venv/bin/python scripts/make_harbour_archive.py

What is planted, so demos have something to find:

* about eighteen legacy tags that pass judgement on people (``people/character/lazy_worker``,
  ``people/roles/fishermen``, ``people/status/vagrant`` ...), kept the way an old card index
  might have them;
* benign tags whose names contain person words (``animals/fish/nurse_shark``,
  ``objects/household/lazy_susan``, ``objects/boats/man_of_war`` ...), which a scan must not flag;
* disagreement: benign tags are applied by most volunteers who saw a photo, while the judging
  tags come mostly from one volunteer (``gannet``), somewhat from a second (``curlew``), and
  rarely from anyone else; two benign look-alike pairs (trawler/drifter, pier/jetty) add
  ordinary, harmless disagreement.

No demographic attributes are written: nobody gave any.
"""

from __future__ import annotations

import csv
from pathlib import Path

import numpy as np

SEED = 20240611
N_PHOTOS = 600
OUT_DIR = Path(__file__).resolve().parents[1] / "sample_sets" / "harbour_archive"

# name -> description. Internal nodes are added automatically from the paths.
BENIGN_TAGS: dict[str, str] = {
    # people: neutral, describing what can be seen
    "people/roles/fisher": "Someone fishing or landing a catch.",
    "people/roles/net_mender": "Someone mending nets on the quay or in a net loft.",
    "people/roles/fish_seller": "Someone selling fish from a stall or barrow.",
    "people/roles/cleaner": "Someone cleaning a building, deck or street.",
    "people/roles/ferry_crew": "Crew of the harbour ferry.",
    "people/roles/lifeboat_crew": "Crew of the lifeboat, at launch or on exercise.",
    "people/roles/harbour_master": "The harbour master at work.",
    "people/roles/lighthouse_keeper": "The keeper of Gull Point light.",
    "people/roles/dock_worker": "Someone loading or unloading cargo.",
    "people/roles/shopkeeper": "Someone serving in a shop.",
    "people/roles/teacher": "A teacher with a class.",
    "people/roles/police_officer": "A police officer on duty.",
    "people/roles/firefighter": "A firefighter or the fire crew.",
    "people/groups/crowd": "A crowd of people.",
    "people/groups/family": "A family group.",
    "people/groups/children": "Children.",
    "people/groups/school_class": "A school class posed for a photograph.",
    "people/groups/young_women": "A group of young women.",
    "people/groups/visitors": "Summer visitors to the town.",
    "people/activity/rowing": "Rowing.",
    "people/activity/swimming": "Swimming or paddling.",
    "people/activity/dancing": "Dancing.",
    "people/activity/queueing": "Standing in a queue.",
    "people/activity/resting": "Sitting or lying down to rest.",
    "people/activity/walking": "Walking.",
    "people/activity/standing": "Standing, not otherwise occupied.",
    "people/activity/drinking": "Drinking, at a bar or outside the inn.",
    "people/activity/at_home": "Indoors at home.",
    "people/activity/sitting_on_steps": "Sitting on steps or a kerb.",
    "people/activity/walking_with_crutches": "Walking with crutches.",
    "people/activity/playing": "Playing.",
    # places
    "places/harbour/pier": "The stone pier.",
    "places/harbour/jetty": "The timber jetty by the ferry steps.",
    "places/harbour/slipway": "The lifeboat slipway.",
    "places/harbour/fish_market": "The covered fish market on Cobble Quay.",
    "places/harbour/breakwater": "The outer breakwater.",
    "places/harbour/lighthouse": "Gull Point lighthouse.",
    "places/harbour/boatyard": "The boatyard at Tarry Steps.",
    "places/town/ropewalk_lane": "Ropewalk Lane.",
    "places/town/netloft_row": "Netloft Row cottages.",
    "places/town/brine_street": "Brine Street shops.",
    "places/town/lantern_hill": "Lantern Hill and the chapel.",
    "places/town/chapel": "The chapel on Lantern Hill.",
    "places/town/school": "The board school.",
    "places/town/tea_room": "The tea room on Brine Street.",
    "places/town/inn": "The Anchor and Gull inn.",
    "places/town/aquarium": "The small aquarium on the front.",
    "places/town/widows_walk": "A rooftop lookout platform on a captain's house.",
    "places/beach/sands": "The sands below the sea wall.",
    "places/beach/rock_pools": "Rock pools under Gull Point.",
    "places/beach/sea_wall": "The sea wall and promenade.",
    "places/cliffs/cliff_path": "The cliff path.",
    # objects
    "objects/boats/trawler": "A trawler.",
    "objects/boats/drifter": "A drifter (herring boat).",
    "objects/boats/rowing_boat": "A rowing boat.",
    "objects/boats/lifeboat": "The lifeboat.",
    "objects/boats/steam_ferry": "The steam ferry.",
    "objects/boats/sailing_barge": "A sailing barge.",
    "objects/boats/crab_boat": "A crab boat.",
    "objects/boats/tramp_steamer": "A cargo steamer with no fixed route.",
    "objects/boats/man_of_war": "A naval warship on a visit.",
    "objects/gear/nets": "Fishing nets.",
    "objects/gear/lobster_pots": "Lobster or crab pots.",
    "objects/gear/fish_boxes": "Fish boxes.",
    "objects/gear/anchor": "An anchor.",
    "objects/knots/fishermans_knot": "The knot of that name (a bend joining two lines).",
    "objects/vehicles/horse_cart": "A horse and cart.",
    "objects/vehicles/bicycle": "A bicycle.",
    "objects/vehicles/motor_van": "A motor van.",
    "objects/vehicles/fire_engine": "The fire engine.",
    "objects/food/fish_and_chips": "Fish and chips.",
    "objects/food/hot_dog_stand": "A hot dog stand.",
    "objects/food/ladyfinger": "Sponge finger biscuits.",
    "objects/food/black_coffee": "Coffee without milk.",
    "objects/household/lazy_susan": "A revolving tray on a table.",
    "objects/household/grandfather_clock": "A tall case clock.",
    "objects/household/oil_lamp": "An oil lamp.",
    "objects/signs/shop_sign": "A shop sign.",
    "objects/signs/tide_board": "The tide board.",
    # events
    "events/regatta": "The August regatta.",
    "events/carnival": "The carnival procession.",
    "events/great_storm": "The storm and its aftermath.",
    "events/launch_day": "A boat launch.",
    "events/sports_day": "The school sports day.",
    "events/harvest_festival": "Harvest festival in the chapel.",
    "events/navy_visit": "A visit by a naval ship.",
    # animals and plants
    "animals/birds/gull": "Gulls.",
    "animals/birds/cormorant": "Cormorants.",
    "animals/dogs/dog": "A dog.",
    "animals/horses/horse": "A horse.",
    "animals/fish/nurse_shark": "A nurse shark (in the aquarium).",
    "animals/fish/catch": "A catch of fish.",
    "animals/insects/soldier_beetle": "A soldier beetle.",
    "plants/lady_fern": "Lady fern on the cliff path.",
    "plants/old_mans_beard": "Old man's beard (wild clematis) in the hedges.",
    "plants/sea_thrift": "Sea thrift.",
    # weather
    "weather/fog": "Fog.",
    "weather/snow": "Snow.",
    "weather/storm_waves": "Storm waves over the breakwater.",
}

LEGACY_NOTE = "Legacy heading from the old card index, kept as found."

# judging tag -> (benign trigger tag, replaces the trigger?, description)
JUDGING_TAGS: dict[str, tuple[str, bool, str]] = {
    "people/roles/fishermen": ("people/roles/fisher", True, LEGACY_NOTE),
    "people/roles/cleaning_lady": ("people/roles/cleaner", True, LEGACY_NOTE),
    "people/roles/fishwife": ("people/roles/fish_seller", True, LEGACY_NOTE),
    "people/roles/boatman": ("people/roles/ferry_crew", True, LEGACY_NOTE),
    "people/roles/old_spinster": ("people/roles/net_mender", False, LEGACY_NOTE),
    "people/roles/housewife": ("people/activity/at_home", False, LEGACY_NOTE),
    "people/character/lazy_worker": ("people/activity/resting", False, LEGACY_NOTE),
    "people/character/drunkard": ("people/activity/drinking", False, LEGACY_NOTE),
    "people/character/troublemaker": ("people/activity/playing", False, LEGACY_NOTE),
    "people/appearance/pretty_girl": ("people/groups/young_women", False, LEGACY_NOTE),
    "people/appearance/bathing_beauty": ("people/activity/swimming", False, LEGACY_NOTE),
    "people/appearance/homely_woman": ("people/activity/at_home", False, LEGACY_NOTE),
    "people/status/poor_family": ("people/groups/family", False, LEGACY_NOTE),
    "people/status/vagrant": ("people/activity/walking", False, LEGACY_NOTE),
    "people/status/beggar": ("people/activity/sitting_on_steps", False, LEGACY_NOTE),
    "people/looks/suspicious_looking": ("people/activity/standing", False, LEGACY_NOTE),
    "people/origin/foreign_looking": ("people/groups/visitors", False, LEGACY_NOTE),
    "people/health/cripple": ("people/activity/walking_with_crutches", False, LEGACY_NOTE),
}

# volunteer -> (chance of applying a judging tag when its trigger is present,
#               chance of applying a benign tag that is present)
VOLUNTEERS: dict[str, tuple[float, float]] = {
    "gannet": (0.70, 0.88),
    "curlew": (0.25, 0.90),
    "heron": (0.04, 0.93),
    "kittiwake": (0.03, 0.92),
    "puffin": (0.02, 0.90),
    "tern": (0.03, 0.86),
    "plover": (0.02, 0.91),
    "dunlin": (0.04, 0.89),
    "godwit": (0.01, 0.94),
}

# benign look-alikes: a volunteer who saw one sometimes writes the other
CONFUSABLE = {
    "objects/boats/trawler": "objects/boats/drifter",
    "objects/boats/drifter": "objects/boats/trawler",
    "places/harbour/pier": "places/harbour/jetty",
    "places/harbour/jetty": "places/harbour/pier",
}
CONFUSION_RATE = 0.15
SPURIOUS_RATE = 0.02

DECADES = ("1900s", "1910s", "1920s", "1930s", "1940s", "1950s", "1960s", "1970s", "1980s")

PLACE_PHRASES = {
    "places/harbour/pier": "on the pier",
    "places/harbour/jetty": "at the ferry jetty",
    "places/harbour/slipway": "on the lifeboat slipway",
    "places/harbour/fish_market": "in the fish market, Cobble Quay",
    "places/harbour/breakwater": "by the outer breakwater",
    "places/harbour/lighthouse": "below Gull Point light",
    "places/harbour/boatyard": "in the boatyard at Tarry Steps",
    "places/town/ropewalk_lane": "in Ropewalk Lane",
    "places/town/netloft_row": "outside the cottages on Netloft Row",
    "places/town/brine_street": "on Brine Street",
    "places/town/lantern_hill": "on Lantern Hill",
    "places/town/chapel": "at the chapel",
    "places/town/school": "at the board school",
    "places/town/tea_room": "in the Brine Street tea room",
    "places/town/inn": "outside the Anchor and Gull",
    "places/town/aquarium": "in the aquarium on the front",
    "places/town/widows_walk": "on a rooftop lookout above the quay",
    "places/beach/sands": "on the sands",
    "places/beach/rock_pools": "at the rock pools",
    "places/beach/sea_wall": "along the sea wall",
    "places/cliffs/cliff_path": "on the cliff path",
}

PEOPLE_PHRASES = {
    "people/roles/fisher": "Landing the catch",
    "people/roles/net_mender": "Mending nets",
    "people/roles/fish_seller": "Selling fish",
    "people/roles/cleaner": "Scrubbing the steps",
    "people/roles/ferry_crew": "The ferry crew",
    "people/roles/lifeboat_crew": "Lifeboat crew",
    "people/roles/harbour_master": "The harbour master",
    "people/roles/lighthouse_keeper": "The light keeper",
    "people/roles/dock_worker": "Unloading cargo",
    "people/roles/shopkeeper": "Behind the counter",
    "people/roles/teacher": "Teacher and pupils",
    "people/roles/police_officer": "Constable on the beat",
    "people/roles/firefighter": "Fire crew drill",
    "people/groups/crowd": "A crowd gathers",
    "people/groups/family": "A family",
    "people/groups/children": "Children",
    "people/groups/school_class": "Class photograph",
    "people/groups/young_women": "Friends",
    "people/groups/visitors": "Summer visitors",
    "people/activity/rowing": "Rowing out",
    "people/activity/swimming": "Bathers",
    "people/activity/dancing": "Dancing",
    "people/activity/queueing": "Queueing",
    "people/activity/resting": "A rest",
    "people/activity/walking": "Walking",
    "people/activity/standing": "Waiting",
    "people/activity/drinking": "A pint",
    "people/activity/at_home": "At home",
    "people/activity/sitting_on_steps": "Sitting on the steps",
    "people/activity/walking_with_crutches": "Walking with crutches",
    "people/activity/playing": "Playing",
}

EVENT_PHRASES = {
    "events/regatta": "regatta day",
    "events/carnival": "carnival week",
    "events/great_storm": "after the great storm",
    "events/launch_day": "launch day",
    "events/sports_day": "sports day",
    "events/harvest_festival": "harvest festival",
    "events/navy_visit": "during the navy visit",
}

# where each people tag can plausibly appear (default: anywhere), so captions read sensibly
AREAS = ("harbour", "town", "beach", "cliffs")
PEOPLE_AREAS: dict[str, tuple[str, ...]] = {
    "people/roles/fisher": ("harbour", "beach"),
    "people/roles/net_mender": ("harbour", "town"),
    "people/roles/fish_seller": ("harbour", "town"),
    "people/roles/cleaner": ("harbour", "town"),
    "people/roles/ferry_crew": ("harbour",),
    "people/roles/lifeboat_crew": ("harbour", "beach"),
    "people/roles/harbour_master": ("harbour",),
    "people/roles/lighthouse_keeper": ("harbour", "cliffs"),
    "people/roles/dock_worker": ("harbour",),
    "people/roles/shopkeeper": ("town",),
    "people/roles/teacher": ("town", "beach"),
    "people/roles/police_officer": ("harbour", "town", "beach"),
    "people/roles/firefighter": ("town", "harbour"),
    "people/groups/school_class": ("town", "beach"),
    "people/activity/rowing": ("harbour",),
    "people/activity/swimming": ("beach",),
    "people/activity/dancing": ("town",),
    "people/activity/drinking": ("town", "harbour"),
    "people/activity/at_home": ("town",),
    "people/activity/sitting_on_steps": ("town", "harbour"),
}

# tags that only make sense with a given place or event, so the scenes stay plausible
PLACE_EXTRAS = {
    "places/town/aquarium": ["animals/fish/nurse_shark"],
    "places/harbour/fish_market": ["animals/fish/catch", "people/roles/fisher"],
    "places/harbour/pier": ["animals/fish/catch", "people/roles/fisher"],
    "places/town/tea_room": ["objects/household/lazy_susan", "objects/food/ladyfinger"],
    "places/town/inn": ["people/activity/drinking", "objects/food/black_coffee"],
    "places/cliffs/cliff_path": ["plants/lady_fern", "plants/old_mans_beard", "plants/sea_thrift"],
    "places/town/netloft_row": ["objects/gear/nets", "people/groups/family"],
    "places/harbour/boatyard": ["objects/knots/fishermans_knot", "objects/gear/anchor"],
    "places/town/ropewalk_lane": ["objects/household/grandfather_clock", "animals/dogs/dog"],
}
EVENT_EXTRAS = {
    "events/regatta": ["objects/food/hot_dog_stand", "people/groups/crowd"],
    "events/carnival": ["objects/food/hot_dog_stand", "people/groups/crowd"],
    "events/navy_visit": ["objects/boats/man_of_war", "people/groups/crowd"],
    "events/great_storm": ["weather/storm_waves"],
    "events/launch_day": ["people/groups/crowd"],
    "events/sports_day": ["people/groups/children", "people/groups/school_class"],
}


def _leaves(prefix: str) -> list[str]:
    return [name for name in BENIGN_TAGS if name.startswith(prefix)]


def _pick(rng: np.random.Generator, options: list[str], k: int = 1) -> list[str]:
    idx = rng.choice(len(options), size=min(k, len(options)), replace=False)
    return [options[int(i)] for i in sorted(idx)]


def make_scene(rng: np.random.Generator) -> list[str]:
    """Choose the tags that are 'really' true of one invented photograph.

    Args:
        rng: The seeded generator.

    Returns:
        Benign tag names, no duplicates, in a stable order.
    """
    place = _pick(rng, _leaves("places/"))[0]
    tags = [place]
    if rng.random() < 0.75:
        area = place.split("/")[1]
        pool = [t for t in _leaves("people/") if area in PEOPLE_AREAS.get(t, AREAS)]
        tags += _pick(rng, pool, int(rng.integers(1, 3)))
    if place.startswith("places/harbour") or (
        place.startswith("places/beach") and rng.random() < 0.5
    ):
        tags += _pick(rng, _leaves("objects/boats/"), int(rng.integers(1, 3)))
    if rng.random() < 0.5:
        others = [t for t in _leaves("objects/") if not t.startswith("objects/boats/")]
        tags += _pick(rng, others)
    if rng.random() < 0.2:
        event = _pick(rng, _leaves("events/"))[0]
        tags.append(event)
        tags += [t for t in EVENT_EXTRAS.get(event, []) if rng.random() < 0.7]
    tags += [t for t in PLACE_EXTRAS.get(place, []) if rng.random() < 0.6]
    if rng.random() < 0.2:
        tags += _pick(rng, _leaves("animals/birds/") + ["animals/dogs/dog", "animals/horses/horse"])
    if rng.random() < 0.12:
        tags += _pick(rng, _leaves("weather/"))
    return list(dict.fromkeys(tags))


def make_caption(tags: list[str]) -> str:
    """Write a short, plain caption from a scene's tags."""
    place = next(PLACE_PHRASES[t] for t in tags if t in PLACE_PHRASES)
    person = next((PEOPLE_PHRASES[t] for t in tags if t in PEOPLE_PHRASES), None)
    event = next((EVENT_PHRASES[t] for t in tags if t in EVENT_PHRASES), None)
    if person is None:
        boat = next((t.rsplit("/", 1)[1].replace("_", " ") for t in tags if "/boats/" in t), None)
        person = f"The {boat}" if boat else "View"
    caption = f"{person} {place}"
    if event:
        caption += f", {event}"
    return caption + "."


def annotate(
    rng: np.random.Generator, photo_id: str, scene: list[str], volunteers: list[str]
) -> list[tuple[str, str, str]]:
    """Let each chosen volunteer tag one photograph.

    Args:
        rng: The seeded generator.
        photo_id: The photograph's id.
        scene: The tags that are true of it.
        volunteers: The volunteers who catalogued it.

    Returns:
        (photo_id, volunteer, tag) rows, one per label.
    """
    triggers: dict[str, list[tuple[str, bool]]] = {}
    for judging, (trigger, replaces, _) in JUDGING_TAGS.items():
        triggers.setdefault(trigger, []).append((judging, replaces))
    all_benign = list(BENIGN_TAGS)
    rows: list[tuple[str, str, str]] = []
    for volunteer in volunteers:
        judge_rate, apply_rate = VOLUNTEERS[volunteer]
        applied: list[str] = []
        for tag in scene:
            keep_benign = True
            for judging, replaces in triggers.get(tag, []):
                if rng.random() < judge_rate:
                    applied.append(judging)
                    if replaces:
                        keep_benign = False
            if keep_benign and (tag.startswith("places/") or rng.random() < apply_rate):
                if tag in CONFUSABLE and rng.random() < CONFUSION_RATE:
                    tag = CONFUSABLE[tag]
                applied.append(tag)
        if rng.random() < SPURIOUS_RATE:
            applied.append(all_benign[int(rng.integers(len(all_benign)))])
        for tag in dict.fromkeys(applied):
            rows.append((photo_id, volunteer, tag))
    return rows


def taxonomy_rows() -> list[tuple[str, str, str, str]]:
    """The tag scheme: every leaf plus its parents, sorted by path."""
    descriptions = dict(BENIGN_TAGS)
    descriptions.update({name: spec[2] for name, spec in JUDGING_TAGS.items()})
    names = set(descriptions)
    for name in list(names):
        parts = name.split("/")
        for i in range(1, len(parts)):
            names.add("/".join(parts[:i]))
    rows = []
    for number, name in enumerate(sorted(names), start=1):
        parent = name.rsplit("/", 1)[0] if "/" in name else ""
        description = descriptions.get(name, "Heading grouping the tags below it.")
        rows.append((f"t{number:03d}", name, parent, description))
    return rows


def _write_csv(path: Path, header: tuple[str, ...], rows: list[tuple[str, ...]]) -> None:
    with path.open("w", encoding="utf-8", newline="") as handle:
        writer = csv.writer(handle, lineterminator="\n")
        writer.writerow(header)
        writer.writerows(rows)


def main() -> None:
    """Generate the sample set into ``sample_sets/harbour_archive/``."""
    rng = np.random.default_rng(SEED)
    names = list(VOLUNTEERS)
    items: list[tuple[str, str, str, str]] = []
    annotations: list[tuple[str, str, str]] = []
    for n in range(1, N_PHOTOS + 1):
        photo_id = f"hb_{n:04d}"
        scene = make_scene(rng)
        decade = DECADES[int(rng.integers(len(DECADES)))]
        items.append((photo_id, make_caption(scene), f"photos/{photo_id}.jpg", decade))
        k = int(rng.integers(3, 6))
        chosen = [names[int(i)] for i in sorted(rng.choice(len(names), size=k, replace=False))]
        annotations += annotate(rng, photo_id, scene, chosen)
    OUT_DIR.mkdir(parents=True, exist_ok=True)
    _write_csv(OUT_DIR / "items.csv", ("photo_id", "caption", "image_file", "decade"), items)
    _write_csv(OUT_DIR / "taxonomy.csv", ("id", "name", "parent", "description"), taxonomy_rows())
    _write_csv(OUT_DIR / "annotations.csv", ("photo_id", "volunteer", "tag"), annotations)


if __name__ == "__main__":
    main()
