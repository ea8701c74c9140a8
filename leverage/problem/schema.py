"""Every key a problem file may hold: section, type, unit, default and meaning.

One table serves validation (``problem.py``), the commented starter file
(``leverage new``) and the documentation, so they cannot drift apart. Units are
in the key names.
"""

from dataclasses import dataclass, field

from leverage.core.constants import PLANET_NAMES

REQUIRED = object()


@dataclass(frozen=True)
class Key:
    """One problem-file key. ``kind``: number, integer, text, boolean, date,
    range (two numbers [low, high]), choice (one of ``choices``), revolutions
    (integer, [min, max] or "any"), numbers (a list of two or more numbers), names
    (a list of distinct ``choices``)."""

    section: str
    name: str
    kind: str
    default: object
    meaning: str
    minimum: float | None = None
    maximum: float | None = None
    choices: tuple = field(default_factory=tuple)
    example: object = None  # shown in a starter file when there is no default

    @property
    def path(self) -> str:
        return f"[{self.section}] {self.name}"


SECTIONS = {
    "study": "What this study is.",
    "body": "The body launched from and flown by on return (the same body).",
    "launch": "Launch window and launch-vehicle limits.",
    "loop": "The loop from launch back to the return flyby, and the deep-space maneuver (DSM).",
    "flyby": "The return flyby.",
    "goal": "What to optimise and which outgoing conditions are required.",
    "target": "Optional: a final leg from the return flyby to a target body.",
    "vehicle": "Optional: launch-vehicle performance and the spacecraft engine, for delivered mass.",
    "ephemeris": "Where the search takes planet positions from.",
    "margins": "How far inside each limit the design must lie (0: on the limit is enough).",
    "search": "The global search (pygmo archipelago) and the final local polish.",
}
# Sections a problem may leave out entirely; then their keys are not used at all.
OPTIONAL_SECTIONS = ("target", "vehicle")

ALGORITHMS = ("sade", "de", "pygmo_de", "de1220", "pso", "cmaes")
# multi-objective, for goal kind "front"; nsga2 is leverage's own compiled NSGA-II
FRONT_ALGORITHMS = ("nsga2", "pygmo_nsga2", "moead", "nspso")
# these breed children from groups of four: the population must be a multiple of 4
POPULATION_IN_FOURS = ("nsga2", "pygmo_nsga2")
POLISHERS = ("bobyqa", "slsqp", "mbh", "none")
# "auto": JPL DE421 when every date fits 1900-2050, else DE423 (1800-2200); mean elements
# only when asked for (fast screening, dates outside every DE span).
EPHEMERIS_SOURCES = ("auto", "de421", "de423", "spk", "mean_elements")
GOALS = ("min_dsm", "max_gain", "weighted", "front", "max_delivered_mass")
# Island i of a run with seed s starts from seed 1000 s + i (leverage.search.single.
# island_seed); pygmo seeds are 32-bit unsigned, so every allowed pair must fit.
MAX_ISLANDS = 256
MAX_SEED = (2**32 - MAX_ISLANDS) // 1000
FRONT_OBJECTIVES = ("total_dv", "gain", "inclination", "arrival_vinf", "delivered_mass")
KEYS = [
    Key(
        "study",
        "name",
        "text",
        None,
        "Short name; results go to results/<name>-<time> by default "
        "(default: the file name without .toml).",
    ),
    Key("study", "description", "text", "", "Free text copied into every summary."),
    Key(
        "body",
        "name",
        "choice",
        REQUIRED,
        "Launch and flyby body.",
        choices=PLANET_NAMES,
        example="earth",
    ),
    Key(
        "launch",
        "window_open_utc",
        "date",
        REQUIRED,
        "First launch date (UTC, YYYY-MM-DD).",
        example="2031-01-01",
    ),
    Key(
        "launch",
        "window_close_utc",
        "date",
        REQUIRED,
        "Last launch date (UTC, YYYY-MM-DD).",
        example="2031-12-31",
    ),
    Key(
        "launch",
        "max_c3_km2_s2",
        "number",
        REQUIRED,
        "Launch energy cap C3 (km^2/s^2): the launcher's limit.",
        minimum=0.0,
        example=20.0,
    ),
    Key(
        "launch",
        "min_c3_km2_s2",
        "number",
        0.0,
        "Lowest launch C3 searched (km^2/s^2).",
        minimum=0.0,
    ),
    Key(
        "launch",
        "min_dla_deg",
        "number",
        -90.0,
        "Lowest allowed declination of the launch asymptote (deg, body equator).",
        minimum=-90.0,
        maximum=90.0,
    ),
    Key(
        "launch",
        "max_dla_deg",
        "number",
        90.0,
        "Highest allowed declination of the launch asymptote (deg, body equator).",
        minimum=-90.0,
        maximum=90.0,
    ),
    Key(
        "launch",
        "in_plane_angle_deg",
        "range",
        [-180.0, 180.0],
        "Launch direction searched in the body's orbit plane, from its velocity toward the "
        "sunward-opposite side (deg).",
        minimum=-360.0,
        maximum=360.0,
    ),
    Key(
        "launch",
        "out_of_plane_angle_deg",
        "range",
        [-90.0, 90.0],
        "Launch direction searched out of the body's orbit plane, toward its orbit normal (deg).",
        minimum=-90.0,
        maximum=90.0,
    ),
    Key(
        "launch",
        "parking_altitude_km",
        "number",
        200.0,
        "Parking-orbit altitude of the departure hyperbola's periapsis, used by leverage "
        "refine (km; 185-200 km is common practice).",
        minimum=50.0,
        maximum=100_000.0,
    ),
    Key(
        "loop",
        "duration_days",
        "range",
        REQUIRED,
        "Launch to return flyby (days).",
        minimum=1.0,
        example=[700.0, 800.0],
    ),
    Key(
        "loop",
        "dsm_fraction",
        "range",
        [0.05, 0.95],
        "DSM epoch as a fraction of the loop duration.",
        minimum=0.0,
        maximum=1.0,
    ),
    Key(
        "loop",
        "revolutions",
        "revolutions",
        "any",
        'Whole revolutions of the DSM-to-return arc: a number, [min, max], or "any" '
        "(0 to max_revolutions); both roots of each are tried at every evaluation.",
    ),
    Key(
        "loop",
        "max_revolutions",
        "integer",
        2,
        'Highest revolution count tried when revolutions = "any".',
        minimum=0,
        maximum=10,
    ),
    Key(
        "flyby",
        "min_altitude_km",
        "number",
        None,
        "Lowest allowed flyby periapsis altitude (km); default: the body's common-practice "
        "value in leverage/bodies.py.",
        minimum=0.0,
    ),
    Key(
        "flyby",
        "max_altitude_km",
        "number",
        None,
        "Highest flyby periapsis altitude searched (km); default: 10 body radii.",
        minimum=0.0,
    ),
    Key(
        "flyby",
        "bplane_angle_deg",
        "range",
        [-180.0, 180.0],
        "B-plane angle searched (deg, from T toward R; T in the ecliptic).",
        minimum=-360.0,
        maximum=360.0,
    ),
    Key(
        "goal",
        "kind",
        "choice",
        "min_dsm",
        "min_dsm: smallest DSM meeting the requirements; max_gain: largest v-infinity gain "
        "(plus inclination_weight_per_deg x inclination) within dsm_budget_km_s; weighted: "
        "dsm_weight x DSM - gain_weight x gain - inclination_weight_per_deg x inclination; "
        "front: the non-dominated trade of the quantities in objectives (multi-objective "
        "search); max_delivered_mass: largest mass left after every burn (needs [vehicle]). "
        "DSM means every burn after launch (total_dv: DSM, flyby and arrival burns).",
        choices=GOALS,
    ),
    Key(
        "goal",
        "objectives",
        "names",
        ["total_dv", "gain"],
        "Front goal: the two or three quantities traded: total_dv (km/s, minimised), gain "
        "(v-infinity gain, km/s, maximised), inclination (outgoing, deg, maximised), "
        "arrival_vinf (km/s, minimised; needs [target] max_arrival_vinf_km_s), delivered_mass "
        "(kg, maximised; needs [vehicle]). total_dv needs dsm_budget_km_s (the hypervolume "
        "reference).",
        choices=FRONT_OBJECTIVES,
    ),
    Key(
        "goal",
        "min_outgoing_vinf_km_s",
        "number",
        0.0,
        "Required v-infinity after the flyby (km/s); 0: none.",
        minimum=0.0,
    ),
    Key(
        "goal",
        "min_outgoing_inclination_deg",
        "number",
        0.0,
        "Required inclination of the outgoing orbit to the ecliptic (deg); 0: none.",
        minimum=0.0,
        maximum=180.0,
    ),
    Key(
        "goal",
        "min_outgoing_aphelion_au",
        "number",
        0.0,
        "Required aphelion of the outgoing orbit (au); 0: none.",
        minimum=0.0,
    ),
    Key(
        "goal",
        "dsm_budget_km_s",
        "number",
        None,
        "Largest DSM allowed (km/s); default: none.",
        minimum=0.0,
    ),
    Key(
        "goal",
        "dsm_weight",
        "number",
        None,
        "Weight of DSM per km/s (weighted goal; default 1).",
        minimum=0.0,
    ),
    Key(
        "goal",
        "gain_weight",
        "number",
        None,
        "Weight of v-infinity gain per km/s (max_gain and weighted goals; default 1).",
        minimum=0.0,
    ),
    Key(
        "goal",
        "inclination_weight_per_deg",
        "number",
        0.0,
        "Weight of outgoing inclination per degree (max_gain and weighted goals).",
        minimum=0.0,
    ),
    Key(
        "goal",
        "arrival_vinf_weight",
        "number",
        0.0,
        "Weight of the arrival v-infinity at the target per km/s, added to a single objective "
        "(needs [target]).",
        minimum=0.0,
    ),
    Key(
        "goal",
        "penalty_weight",
        "number",
        10.0,
        "Objective units added per scale of limit violation (see DEVELOPERS.md).",
        minimum=0.0,
    ),
    Key(
        "target",
        "name",
        "text",
        REQUIRED,
        "A planet (mercury ... neptune) or the name of a small body given by the element keys "
        "below (heliocentric, ecliptic J2000).",
        example="mars",
    ),
    Key(
        "target",
        "semi_major_axis_au",
        "number",
        None,
        "Small body: semi-major axis (au).",
        minimum=0.01,
    ),
    Key(
        "target",
        "eccentricity",
        "number",
        None,
        "Small body: eccentricity (elliptic orbits only).",
        minimum=0.0,
        maximum=0.99,
    ),
    Key(
        "target",
        "inclination_deg",
        "number",
        None,
        "Small body: inclination to the ecliptic J2000 (deg).",
        minimum=0.0,
        maximum=180.0,
    ),
    Key(
        "target",
        "ascending_node_deg",
        "number",
        None,
        "Small body: longitude of the ascending node (deg).",
        minimum=-360.0,
        maximum=360.0,
    ),
    Key(
        "target",
        "argument_of_perihelion_deg",
        "number",
        None,
        "Small body: argument of perihelion (deg).",
        minimum=-360.0,
        maximum=360.0,
    ),
    Key(
        "target",
        "mean_anomaly_deg",
        "number",
        None,
        "Small body: mean anomaly at the elements epoch (deg).",
        minimum=-360.0,
        maximum=360.0,
    ),
    Key(
        "target",
        "elements_epoch_tdb",
        "date",
        None,
        "Small body: epoch of the elements (TDB, YYYY-MM-DD or YYYY-MM-DDTHH:MM:SS).",
    ),
    Key(
        "target",
        "leg_duration_days",
        "range",
        REQUIRED,
        "Return flyby to arrival at the target (days).",
        minimum=1.0,
        example=[150.0, 400.0],
    ),
    Key(
        "target", "arrival_open_utc", "date", None, "Earliest allowed arrival (UTC); default: none."
    ),
    Key(
        "target", "arrival_close_utc", "date", None, "Latest allowed arrival (UTC); default: none."
    ),
    Key(
        "target",
        "max_arrival_vinf_km_s",
        "number",
        None,
        "Largest allowed v-infinity at the target (km/s); default: none.",
        minimum=0.0,
    ),
    Key(
        "target",
        "flyby",
        "choice",
        "unpowered",
        "Return flyby: unpowered (|v-infinity| in and out must match within "
        "vinf_match_tolerance_km_s) or powered (a periapsis burn makes up the difference and is "
        "counted in total_dv).",
        choices=("unpowered", "powered"),
    ),
    Key(
        "target",
        "vinf_match_tolerance_km_s",
        "number",
        0.005,
        "Unpowered flyby: largest allowed difference of |v-infinity| in and out (km/s).",
        minimum=0.0,
    ),
    Key(
        "target",
        "arrival_burn",
        "boolean",
        False,
        "Count a burn equal to the arrival v-infinity (a rendezvous) in total_dv and the "
        "delivered mass.",
    ),
    Key("vehicle", "name", "text", "", "Launch vehicle name, copied into the summary."),
    Key(
        "vehicle",
        "c3_km2_s2",
        "numbers",
        REQUIRED,
        "Launch energies of the performance table (km^2/s^2, increasing; at most 32 rows).",
        minimum=0.0,
        example=[0.0, 10.0, 20.0, 30.0],
    ),
    Key(
        "vehicle",
        "injected_mass_kg",
        "numbers",
        REQUIRED,
        "Mass the vehicle injects at each C3 of the table (kg). Linear interpolation between "
        "rows; a C3 outside the table is infeasible.",
        minimum=0.0,
        example=[2000.0, 1700.0, 1400.0, 1100.0],
    ),
    Key(
        "vehicle",
        "specific_impulse_s",
        "number",
        REQUIRED,
        "Specific impulse of the spacecraft engine for every burn after launch (s).",
        minimum=1.0,
        example=320.0,
    ),
    Key(
        "ephemeris",
        "source",
        "choice",
        "auto",
        "Planet positions in the search: auto (JPL DE421 if every date of the problem fits "
        "1900-2050, else DE423, 1800-2200), de421, de423, spk (the JPL SPK file spk_file), "
        "or mean_elements (Standish's mean elements, 1800-2050: fast screening, only when "
        "asked for). The verification re-flies the design with the same ephemeris through "
        "jplephem (DE421 when the search used mean elements).",
        choices=EPHEMERIS_SOURCES,
    ),
    Key(
        "ephemeris",
        "spk_file",
        "text",
        None,
        'Path of a JPL SPK kernel (.bsp) on disk, for source = "spk" (relative paths '
        "are taken from the problem file's folder). Nothing is downloaded.",
        example="ephemerides/de440s.bsp",
    ),
    Key(
        "margins",
        "c3_km2_s2",
        "number",
        0.0,
        "Design margin below [launch] max_c3_km2_s2 (km^2/s^2).",
        minimum=0.0,
    ),
    Key(
        "margins",
        "dla_deg",
        "number",
        0.0,
        "Design margin inside the [launch] DLA band, each side (deg).",
        minimum=0.0,
        maximum=90.0,
    ),
    Key(
        "margins",
        "flyby_altitude_km",
        "number",
        0.0,
        "Design margin above [flyby] min_altitude_km (km); the turn limit follows it.",
        minimum=0.0,
    ),
    Key(
        "margins",
        "dsm_km_s",
        "number",
        0.0,
        "Design margin below [goal] dsm_budget_km_s (km/s).",
        minimum=0.0,
    ),
    Key(
        "margins",
        "outgoing_vinf_km_s",
        "number",
        0.0,
        "Design margin above [goal] min_outgoing_vinf_km_s (km/s).",
        minimum=0.0,
    ),
    Key(
        "margins",
        "outgoing_inclination_deg",
        "number",
        0.0,
        "Design margin above [goal] min_outgoing_inclination_deg (deg).",
        minimum=0.0,
    ),
    Key(
        "margins",
        "outgoing_aphelion_au",
        "number",
        0.0,
        "Design margin above [goal] min_outgoing_aphelion_au (au).",
        minimum=0.0,
    ),
    Key(
        "margins",
        "arrival_vinf_km_s",
        "number",
        0.0,
        "Design margin below [target] max_arrival_vinf_km_s (km/s).",
        minimum=0.0,
    ),
    Key(
        "search",
        "algorithm",
        "choice",
        None,
        "Global algorithm on every island (default de; nsga2 for a front goal). Single "
        "objective: de (compiled), pygmo_de, sade, de1220, pso, cmaes; front: nsga2 "
        "(compiled; population a multiple of 4), pygmo_nsga2 (the same rule), moead, nspso.",
        choices=ALGORITHMS + FRONT_ALGORITHMS,
    ),
    Key(
        "search",
        "islands",
        "integer",
        2,
        "Islands (worker processes) in the archipelago.",
        minimum=1,
        maximum=MAX_ISLANDS,
    ),
    # Defaults chosen by benchmarks/search_quality.py (benchmarks/README.md, "Compiled
    # search, end of round" and "Launch-direction sectors"): 2 islands x 64 x 4000
    # generations of the compiled de, with the widened box and the 1000-generation
    # sector epochs of search.single, 500
    # generations per migration (each evolution costs the run a few ms of sending,
    # logging and waiting: 50 ran ~20% slower than 200, 200 ~14% slower than 500, for
    # the same hits within one seed).
    Key(
        "search", "population", "integer", 64, "Individuals per island.", minimum=8, maximum=100000
    ),
    Key("search", "generations", "integer", 4000, "Generations per island in all.", minimum=1),
    Key(
        "search",
        "generations_per_migration",
        "integer",
        500,
        "Generations between migrations (and log lines).",
        minimum=1,
    ),
    Key(
        "search",
        "seed",
        "integer",
        1,
        "Random seed: same seed and islands, same answer.",
        minimum=0,
        maximum=MAX_SEED,
    ),
    Key(
        "search",
        "polish",
        "choice",
        "bobyqa",
        "Local optimiser run on the champion at the end (pygmo nlopt bobyqa or slsqp, pygmo "
        "mbh, or none; not used for a front goal).",
        choices=POLISHERS,
    ),
]


def keys_by_section() -> dict:
    """{section: {name: Key}} in table order."""
    out: dict = {}
    for key in KEYS:
        out.setdefault(key.section, {})[key.name] = key
    return out
