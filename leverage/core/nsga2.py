"""NSGA-II compiled whole: every generation of one evolution in one numba call.

The method is that of Deb, Pratap, Agarwal and Meyarivan (2002), "A fast and elitist
multiobjective genetic algorithm: NSGA-II", IEEE Trans. Evol. Comput. 6(2), 182-197:

- fast non-dominated sorting (their Sec. III-A) gives each member a front number;
- the crowding distance (Sec. III-B) is, within a front, the sum over objectives of
  the gap between a member's two neighbours along that objective, divided by the
  front's range of it; a front's extreme members get infinity;
- parents are picked by binary tournaments on the crowded comparison (lower front
  wins, then the larger crowding distance; a tie is a coin toss), without
  replacement: the population is shuffled twice and each shuffle is read in groups of
  four, two tournaments and one pair of parents a group (Goldberg and Deb 1991, "A
  comparative analysis of selection schemes used in genetic algorithms", FOGA 1;
  from memory). The population must therefore be a multiple of 4;
- each pair gives two children by simulated binary crossover (SBX, Deb and Agrawal
  1995, Complex Systems 9; from memory) in its bounded form: with probability ``cr``
  the pair is crossed, each variable then with probability 1/2, the spread drawn so
  that no child leaves [lower, upper]; then polynomial mutation (Deb and Goyal 1996;
  from memory), bounded the same way, of each variable with probability ``m``;
- elitism: parents and children together are sorted and the best N by front, then by
  crowding distance within the last front that fits, survive.

Variables are continuous; children are clipped to [lower, upper] against round-off
(the bounded operators keep them inside in exact arithmetic). Objectives are minimised.
Random numbers come from numba's own generator, seeded by ``np.random.seed(seed32)``
at the start of ``evolve`` (so a call is fixed by its seed; numpy's generator is not
touched). The pieces are separate functions so that a test can drive them from Python
with another fitness (numba's generator state is shared by every compiled function of
the thread, so ``seed`` then the pieces replay ``evolve`` exactly).

Units are those of the decision vector and objectives handed in (``core.layout``).
"""

import numpy as np
from numba import njit

from . import trajectory

_TINY_GAP = 1.0e-14  # parents closer than this in a variable are not crossed in it


@njit(cache=True)
def seed(seed32):
    """Seed numba's generator of this thread (what ``evolve`` does first)."""
    np.random.seed(seed32)


@njit(cache=True)
def _dominance(f, i, j):
    """1 if row i dominates row j (minimised: nowhere worse, somewhere better), -1 if j
    dominates i, 0 otherwise."""
    better = False
    worse = False
    for k in range(f.shape[1]):
        if f[i, k] < f[j, k]:
            better = True
        elif f[i, k] > f[j, k]:
            worse = True
    if better and not worse:
        return 1
    if worse and not better:
        return -1
    return 0


@njit(cache=True)
def non_dominated_ranks(f):
    """Front number of each row of f (rows: members, columns: minimised objectives):
    0 for the non-dominated rows, 1 for those dominated only by front 0, and so on.
    Equal rows do not dominate each other and share a front.

    Two objectives: one sort and one sweep (``_ranks_two_objectives``); more: fast
    non-dominated sorting (Deb et al. 2002, Sec. III-A), O(M N^2)."""
    if f.shape[1] == 2:
        return _ranks_two_objectives(f)
    n = f.shape[0]
    beaten_by = np.zeros(n, np.int64)  # how many rows dominate row i
    n_beats = np.zeros(n, np.int64)
    beats = np.empty((n, n), np.int64)  # beats[i, :n_beats[i]]: rows that row i dominates
    for i in range(n):
        for j in range(i + 1, n):
            d = _dominance(f, i, j)
            if d == 1:
                beats[i, n_beats[i]] = j
                n_beats[i] += 1
                beaten_by[j] += 1
            elif d == -1:
                beats[j, n_beats[j]] = i
                n_beats[j] += 1
                beaten_by[i] += 1
    rank = np.full(n, -1, np.int64)
    current = np.empty(n, np.int64)
    following = np.empty(n, np.int64)
    size = 0
    for i in range(n):
        if beaten_by[i] == 0:
            rank[i] = 0
            current[size] = i
            size += 1
    front = 0
    while size > 0:
        next_size = 0
        for a in range(size):
            i = current[a]
            for b in range(n_beats[i]):
                j = beats[i, b]
                beaten_by[j] -= 1
                if beaten_by[j] == 0:
                    rank[j] = front + 1
                    following[next_size] = j
                    next_size += 1
        current, following = following, current
        size = next_size
        front += 1
    return rank


@njit(cache=True)
def _ranks_two_objectives(f):
    """``non_dominated_ranks`` of a two-column f in O(N log N + N * fronts).

    Rows are visited in order of the first objective, ties by the second, so every row
    that can dominate a row comes before it; a row joins the first front none of whose
    members dominates it (efficient non-dominated sort, Zhang, Tian, Cheng and Jin 2015,
    IEEE Trans. Evol. Comput. 19(2); from memory). In that order a front's members have
    falling second objectives, so its latest member is the only one to compare with.
    On 128 rows of a trade-front generation Deb's pairwise sort took 24 us, this
    4.3 us (measured)."""
    n = f.shape[0]
    by_second = np.argsort(f[:, 1], kind="mergesort")
    first = np.empty(n)
    for a in range(n):
        first[a] = f[by_second[a], 0]
    order = by_second[np.argsort(first, kind="mergesort")]
    rank = np.empty(n, np.int64)
    latest_first = np.empty(n)  # per front: objectives of its latest member
    latest_second = np.empty(n)
    fronts = 0
    for p in order:
        a, b = f[p, 0], f[p, 1]
        k = 0
        # latest member of front k dominates p (its first objective is <= a)
        while k < fronts and (
            latest_second[k] < b or (latest_second[k] == b and latest_first[k] < a)
        ):
            k += 1
        rank[p] = k
        latest_first[k] = a
        latest_second[k] = b
        if k == fronts:
            fronts += 1
    return rank


@njit(cache=True)
def _crowd_front(f, members, out):
    """Crowding distance of the rows ``members`` (one front) of f, into out[members].
    With two objectives one sort serves both: along a front, the first objective
    rising means the second falling (equal rows aside, which then order differently)."""
    size = members.shape[0]
    for a in range(size):
        out[members[a]] = 0.0
    if size <= 2:
        for a in range(size):
            out[members[a]] = np.inf
        return
    values = np.empty(size)
    order = np.empty(size, np.int64)
    for k in range(f.shape[1]):
        for a in range(size):
            values[a] = f[members[a], k]
        if k == 0 or f.shape[1] != 2:
            order = np.argsort(values, kind="mergesort")
        else:
            order = order[::-1].copy()
        low = values[order[0]]
        high = values[order[size - 1]]
        out[members[order[0]]] = np.inf
        out[members[order[size - 1]]] = np.inf
        if high > low:  # an objective equal over the whole front adds nothing
            for a in range(1, size - 1):
                gap = values[order[a + 1]] - values[order[a - 1]]
                out[members[order[a]]] += gap / (high - low)


@njit(cache=True)
def crowding_distances(f, rank):
    """Crowding distance of each row of f within its own front (``rank`` from
    ``non_dominated_ranks``), in objectives scaled by each front's range (Deb et al.
    2002, Sec. III-B): infinite for a front's extreme rows and for fronts of one or two
    rows."""
    n = f.shape[0]
    out = np.zeros(n)
    order = np.argsort(rank, kind="mergesort")
    start = 0
    while start < n:
        stop = start
        while stop < n and rank[order[stop]] == rank[order[start]]:
            stop += 1
        _crowd_front(f, order[start:stop], out)
        start = stop
    return out


@njit(cache=True)
def _crowded_winner(a, b, rank, crowd):
    """The better of members a and b by the crowded comparison; a tie is a coin toss."""
    if rank[a] != rank[b]:
        return a if rank[a] < rank[b] else b
    if crowd[a] != crowd[b]:
        return a if crowd[a] > crowd[b] else b
    return a if np.random.random() < 0.5 else b


@njit(cache=True)
def _sbx_alpha(beta, eta_c, beta_far):
    """alpha = 2 - beta ** -(eta_c + 1) of bounded SBX, where beta (>= 1) is 1 plus twice
    the room to the bound over the parents' gap (Deb and Agrawal 1995). Beyond beta_far
    (``sbx_pair``) the power is below half an ulp of 2 and alpha is exactly 2: the same
    bits without the power."""
    return 2.0 if beta >= beta_far else 2.0 - beta ** -(eta_c + 1.0)


@njit(cache=True)
def _sbx_spread(alpha, r, eta_c):
    """Spread factor of bounded SBX for the uniform draw r and ``_sbx_alpha``."""
    if r <= 1.0 / alpha:
        return (r * alpha) ** (1.0 / (eta_c + 1.0))
    return (1.0 / (2.0 - r * alpha)) ** (1.0 / (eta_c + 1.0))


@njit(cache=True)
def sbx_pair(p1, p2, lower, upper, cr, eta_c, c1, c2):
    """Two children c1, c2 of parents p1, p2 by bounded simulated binary crossover:
    with probability cr the pair is crossed, then each variable with probability 1/2."""
    c1[:] = p1
    c2[:] = p2
    if np.random.random() >= cr:
        return
    # beta ** -(eta_c + 1) is below half an ulp of 2 once beta > 2 ** (53 / (eta_c + 1));
    # one bit of margin. Far from both bounds (room >> gap, most pairs once a population
    # has gathered) both children then share alpha = 2 and one spread: one power a
    # variable instead of four, the same bits (benchmarks/README.md).
    beta_far = 2.0 ** (54.0 / (eta_c + 1.0))
    for i in range(p1.shape[0]):
        if np.random.random() >= 0.5:
            continue
        y1 = min(p1[i], p2[i])
        y2 = max(p1[i], p2[i])
        gap = y2 - y1
        if gap <= _TINY_GAP:
            continue
        r = np.random.random()
        alpha_low = _sbx_alpha(1.0 + 2.0 * (y1 - lower[i]) / gap, eta_c, beta_far)
        alpha_high = _sbx_alpha(1.0 + 2.0 * (upper[i] - y2) / gap, eta_c, beta_far)
        spread_low = _sbx_spread(alpha_low, r, eta_c)
        spread_high = spread_low if alpha_high == alpha_low else _sbx_spread(alpha_high, r, eta_c)
        low_child = 0.5 * (y1 + y2 - spread_low * gap)
        high_child = 0.5 * (y1 + y2 + spread_high * gap)
        low_child = min(max(low_child, lower[i]), upper[i])
        high_child = min(max(high_child, lower[i]), upper[i])
        if np.random.random() < 0.5:
            c1[i], c2[i] = high_child, low_child
        else:
            c1[i], c2[i] = low_child, high_child


@njit(cache=True)
def polynomial_mutation(c, lower, upper, m, eta_m):
    """Bounded polynomial mutation of c in place: each variable with probability m,
    the step's distribution index eta_m, never past [lower, upper] (Deb and Goyal 1996)."""
    power = 1.0 / (eta_m + 1.0)
    for i in range(c.shape[0]):
        if np.random.random() >= m:
            continue
        span = upper[i] - lower[i]
        if span <= 0.0:
            continue
        y = c[i]
        r = np.random.random()
        if r < 0.5:
            room = 1.0 - (y - lower[i]) / span
            step = (2.0 * r + (1.0 - 2.0 * r) * room ** (eta_m + 1.0)) ** power - 1.0
        else:
            room = 1.0 - (upper[i] - y) / span
            step = 1.0 - (2.0 * (1.0 - r) + 2.0 * (r - 0.5) * room ** (eta_m + 1.0)) ** power
        c[i] = min(max(y + step * span, lower[i]), upper[i])


@njit(cache=True)
def offspring(x, rank, crowd, lower, upper, cr, eta_c, m, eta_m):
    """As many children as rows of x (a multiple of 4): tournaments without replacement
    on two shuffles, bounded SBX and polynomial mutation (see the module docstring)."""
    n = x.shape[0]
    if n % 4 != 0:
        raise ValueError("NSGA-II needs a population that is a multiple of 4")
    children = np.empty_like(x)
    k = 0
    for _ in range(2):
        shuffled = np.random.permutation(n)
        for i in range(0, n, 4):
            a = _crowded_winner(shuffled[i], shuffled[i + 1], rank, crowd)
            b = _crowded_winner(shuffled[i + 2], shuffled[i + 3], rank, crowd)
            sbx_pair(x[a], x[b], lower, upper, cr, eta_c, children[k], children[k + 1])
            polynomial_mutation(children[k], lower, upper, m, eta_m)
            polynomial_mutation(children[k + 1], lower, upper, m, eta_m)
            k += 2
    return children


@njit(cache=True)
def survivors(f, n_keep):
    """Indices of the n_keep best rows of f: whole fronts in order, then the members of
    the first front that does not fit by decreasing crowding distance (ties by row);
    and the front number of each row of f."""
    rank = non_dominated_ranks(f)
    by_front = np.argsort(rank, kind="mergesort")
    last = rank[by_front[n_keep - 1]]  # the front cut by n_keep (or ending there)
    start = 0
    while rank[by_front[start]] != last:
        start += 1
    stop = start
    while stop < f.shape[0] and rank[by_front[stop]] == last:
        stop += 1
    keep = by_front[:n_keep].copy()
    if stop > n_keep:
        members = by_front[start:stop]
        crowd = np.zeros(f.shape[0])
        _crowd_front(f, members, crowd)
        most_room = np.argsort(-crowd[members], kind="mergesort")
        keep[start:] = members[most_room[: n_keep - start]]
    return keep, rank


@njit(cache=True)
def next_generation(x, f, children, f_children):
    """Parents and children merged, the best len(x) kept (elitist survival); returns
    their decision vectors, objectives, front numbers and crowding distances (the
    latter recomputed among the survivors, for the next tournaments)."""
    x_all = np.vstack((x, children))
    f_all = np.vstack((f, f_children))
    keep, rank_all = survivors(f_all, x.shape[0])
    x_new = x_all[keep]
    f_new = f_all[keep]
    rank = rank_all[keep]
    return x_new, f_new, rank, crowding_distances(f_new, rank)


@njit(cache=True)
def front_of_two(f):
    """Rows of a two-column f (minimised) that no other row dominates or equals (of
    equal rows the first in sort order), in order of the first objective: sorted by
    the first objective, then the second, a row is kept when its second objective is
    below every earlier row's (Kung, Luccio and Preparata 1975, J. ACM 22(4))."""
    by_second = np.argsort(f[:, 1], kind="mergesort")
    first = np.empty(f.shape[0])
    for a in range(f.shape[0]):
        first[a] = f[by_second[a], 0]
    order = by_second[np.argsort(first, kind="mergesort")]
    keep = np.empty(f.shape[0], np.int64)
    kept = 0
    lowest = np.inf
    for i in order:
        if f[i, 1] < lowest:
            keep[kept] = i
            kept += 1
            lowest = f[i, 1]
    return keep[:kept]


@njit(cache=True)
def archive_merge(ax, af, count, bx, bf, nb):
    """Merge the nb offered designs bx[:nb], bf[:nb] into the archive ax[:count],
    af[:count] of mutually non-dominated designs (two minimised objectives); returns
    the new count. Designs dominated by or equal to another leave (``front_of_two``);
    beyond the archive's capacity (its rows) it keeps its 3/4 most spread members:
    largest crowding distance, its two extreme members first (the crowded truncation
    of Deb et al. 2002, Sec. III-B, on one front)."""
    all_x = np.vstack((ax[:count], bx[:nb]))
    all_f = np.vstack((af[:count], bf[:nb]))
    keep = front_of_two(all_f)
    if keep.shape[0] > ax.shape[0]:
        crowd = np.zeros(all_f.shape[0])
        _crowd_front(all_f, keep, crowd)
        spread = np.argsort(-crowd[keep], kind="mergesort")[: ax.shape[0] * 3 // 4]
        keep = keep[np.sort(spread)]
    for a in range(keep.shape[0]):
        ax[a] = all_x[keep[a]]
        af[a] = all_f[keep[a]]
    return keep.shape[0]


@njit(cache=True)
def _covered(af, count, a, b):
    """True if a member of the archive af[:count] (two objectives, in order of the
    first, as ``archive_merge`` leaves it) dominates or equals the point (a, b): the
    member with the largest first objective <= a has the smallest second among those.
    Such an offer would leave at the next merge (``front_of_two``), and changes
    nothing else there, so ``settle`` need not buffer it: the merges are smaller."""
    after = np.searchsorted(af[:count, 0], a, side="right")  # first member with more
    return after > 0 and af[after - 1, 1] <= b


@njit(cache=True)
def start(x, f, seed32, archive_rows):
    """What an evolution starts from: numba's generator of this thread seeded with
    seed32, the population's front numbers and crowding distances, and an empty
    archive (``new_archive``). Returns (rank, crowd, archive)."""
    np.random.seed(seed32)
    rank = non_dominated_ranks(f)
    return rank, crowding_distances(f, rank), new_archive(archive_rows, x.shape[1], f.shape[1])


@njit(cache=True)
def settle(x, f, children, scores, archive):
    """The second half of a generation, ``scores`` = (objectives, feasible flags) of
    the children: the feasible children offered to the archive
    (two objectives; ``archive`` = (ax, af, bx, bf, counts): the archive, a buffer of
    offers of the same size, and counts[0] members, counts[1] offers since the last
    merge, counts[2] of them in the buffer; the archive merges the buffer when it has
    had as many offers as it has rows, ``archive_merge``), then elitist survival
    (``next_generation``). An offer that a member dominates or equals (``_covered``)
    is counted but not buffered: the merge would drop it, and the merges come when
    they would if it were buffered. Returns (x, f, rank, crowd)."""
    f_children, feasible = scores
    ax, af, bx, bf, counts = archive
    if ax.shape[0] > 0:
        for i in range(children.shape[0]):
            if not feasible[i]:
                continue
            if counts[1] == bx.shape[0]:
                counts[0] = archive_merge(ax, af, counts[0], bx, bf, counts[2])
                counts[1] = 0
                counts[2] = 0
            counts[1] += 1
            if not _covered(af, counts[0], f_children[i, 0], f_children[i, 1]):
                bx[counts[2]] = children[i]
                bf[counts[2]] = f_children[i]
                counts[2] += 1
    return next_generation(x, f, children, f_children)


@njit(cache=True)
def new_archive(rows, n_var, n_obj):
    """An empty archive for ``settle`` (no archive when rows is 0 or n_obj is not 2)."""
    rows = rows if n_obj == 2 else 0
    return (
        np.empty((rows, n_var)),
        np.empty((rows, n_obj)),
        np.empty((rows, n_var)),
        np.empty((rows, n_obj)),
        np.zeros(3, np.int64),
    )


@njit(cache=True)
def archive_contents(archive):
    """(x, f) of the archive's members after merging its pending offers."""
    ax, af, bx, bf, counts = archive
    if counts[1] > 0:
        counts[0] = archive_merge(ax, af, counts[0], bx, bf, counts[2])
        counts[1] = 0
        counts[2] = 0
    return ax[: counts[0]].copy(), af[: counts[0]].copy()


@njit(cache=True)
def evolve(x, f, lower, upper, p, generations, cr, eta_c, m, eta_m, seed32, archive_rows):
    """``generations`` NSGA-II generations of the population (x: rows of decision
    vectors in [lower, upper]; f: their objectives from ``trajectory.fitness`` with
    parameter array p), all in this call, on this thread: the children are evaluated
    a generation at a time by ``trajectory.batch_scores_one_thread``.

    With two objectives every feasible child is offered to an archive of at most
    ``archive_rows`` mutually non-dominated designs (``settle``), so the feasible front
    of every generation is kept, not only of the last; with more, none is kept.

    Returns the final (x, f) and the archive's (x, f); evaluations made:
    generations * len(x)."""
    rank, crowd, archive = start(x, f, seed32, archive_rows)
    for _ in range(generations):
        children = offspring(x, rank, crowd, lower, upper, cr, eta_c, m, eta_m)
        scores = trajectory.batch_scores_one_thread(children, p)
        x, f, rank, crowd = settle(x, f, children, scores, archive)
    met_x, met_f = archive_contents(archive)
    return x, f, met_x, met_f


def evolve_in_threads(
    x, f, lower, upper, p, generations, cr, eta_c, m, eta_m, seed32, archive_rows
):
    """``evolve`` with each generation's children evaluated in numba's threads
    (``trajectory.batch_scores``): the same result, the generations driven from Python
    (a cached compiled function must not call a numba-parallel one; see
    ``trajectory.batch_fitness``). For a search in one process; ~20 us of Python a
    generation against ~100-200 us of evaluations."""
    rank, crowd, archive = start(x, f, seed32, archive_rows)
    for _ in range(generations):
        children = offspring(x, rank, crowd, lower, upper, cr, eta_c, m, eta_m)
        x, f, rank, crowd = settle(x, f, children, trajectory.batch_scores(children, p), archive)
    return (x, f) + archive_contents(archive)
