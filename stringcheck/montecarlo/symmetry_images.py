"""The images of a failure point under a string's symmetries (``montecarlo.importance``).

Devices in series share one current and parallel branches one voltage, whatever their order: a
permutation of the positions within a branch, or of whole branches, that maps every position onto
one of the same part, temperature rise and placed serial leaves every check's stress unchanged.
The importance sampler shifts to every image of its failure point under those permutations (the
orbit), and to approximate images where positions differ only in part or temperature rise. The
functions take the sampler's latent-space layout (``rare_events._Space``: ``position_vectors`` and
``rearranged``) and return latent points; no I/O.
"""

from __future__ import annotations

import itertools
from typing import Callable

import numpy as np

from stringcheck.design.model import Design

MAX_IMAGES = 1024  # rearrangements of the failure point used as shifts, at most
_CLUSTER_TOLERANCE = 0.05  # latent units: positions whose coordinates agree this well count as one
_CLUSTER_SHARE = 0.25  # ... or within this share of the largest departure from the median position


def _position_keys(design: Design) -> np.ndarray:
    """What makes two positions interchangeable: part, temperature rise and placed serial."""
    layout = design.string
    keys = np.empty((layout.parallel, layout.series), dtype=object)
    parts, rises, serials = layout.part_grid(), layout.temperature_rise_grid(), \
        layout.serial_grid()
    for position in np.ndindex(keys.shape):
        keys[position] = (parts[position], float(rises[position]), serials[position])
    return keys


def failure_point_images(design: Design, space, point: np.ndarray,
                         near: Callable[[np.ndarray], np.ndarray | None] | None = None
                         ) -> np.ndarray:
    """The images of :func:`failure_point_orbit` alone."""
    return failure_point_orbit(design, space, point, near)[0]


def failure_point_orbit(design: Design, space, point: np.ndarray,
                        near: Callable[[np.ndarray], np.ndarray | None] | None = None
                        ) -> tuple[np.ndarray, bool]:
    """The failure point and its distinct images under the string's symmetries, (M, D), the point
    first, and whether they are the whole orbit.

    Devices in series share one current and parallel branches one voltage, whatever their order:
    permuting the positions of a branch, or whole branches, leaves the stress unchanged where it
    maps every position onto one of the same part, temperature rise and serial (None: drawn). The
    images are the distinct rearrangements of the point's per-position coordinates under those
    permutations; positions whose coordinates agree within :data:`_CLUSTER_TOLERANCE`, or within
    :data:`_CLUSTER_SHARE` of the largest departure of a position from the median one, count as
    one (the other devices of a string at its failure point are usually alike), so M is the size
    of the orbit: n for one device unlike n - 1 alike ones, n (n - 1) for two unlike ones. Fewer
    images would leave part of the failure region to the defensive half of the samples and
    estimate too little with a small standard error: an orbit of more than :data:`MAX_IMAGES`
    (a failure point whose other devices are not alike) is cut there and reported incomplete
    (False), and the estimate must then not decide. With ``near`` (images -> bool each), rearrangements
    between positions that differ in part or temperature rise (not in a placed serial) are used
    too where ``near`` says the image lies close to failure: the charge balance and the turn-off
    hardly feel the temperature, two parts may be alike, and leaving such positions out would
    estimate only the share of P(fail) of those kept. Lots stay (they are per part). Any set of
    shifts keeps the estimate unbiased; the images make it efficient.
    """
    keys = _position_keys(design)
    vectors = space.position_vectors(point)
    # Alike: within 0.05, or within a quarter of the largest departure of a position from the
    # median position (a device that stands out stays apart; the small, uneven rest of the string
    # counts as one background, whose order barely moves the image).
    flat = vectors.reshape(-1, vectors.shape[-1])
    departures = np.linalg.norm(flat - np.median(flat, axis=0), axis=1) if flat.size else \
        np.zeros(flat.shape[0])
    tolerance = max(_CLUSTER_TOLERANCE, _CLUSTER_SHARE * float(np.max(departures, initial=0.0)))
    sources, complete = _rearrangements(vectors, keys, tolerance, MAX_IMAGES)
    images = [space.rearranged(point, source) for source in sources]
    if near is not None:
        # Near symmetries (another part or temperature rise, no serial placed): the device that
        # stands out moved to each other such position of its branch, the rest left where it is
        # (in a temperature gradient the rest follows the positions, not the device). From the
        # point alone: from one of its exact images it would reach the same places again.
        series = keys.shape[1]
        serials = design.string.serial_grid().reshape(-1)
        flat_keys = keys.reshape(-1)
        where = int(np.argmax(departures))
        branch = where // series
        candidates = []
        for other in range(branch * series, (branch + 1) * series):
            if other == where or serials[other] is not None or serials[where] is not None \
                    or flat_keys[other] == flat_keys[where]:  # the orbit has that one
                continue
            swap = np.arange(flat_keys.size)
            swap[[where, other]] = swap[[other, where]]
            candidates.append(space.rearranged(point, swap))
        for candidate in candidates:
            settled = near(candidate)
            if settled is not None:
                images.append(settled)
    # The point first; images that coincide within rounding kept once.
    out = [point]
    limit = 1e-9 * max(1.0, float(np.linalg.norm(point)))
    for image in images:
        if np.min(np.linalg.norm(np.asarray(out) - image, axis=1)) > limit:
            out.append(image)
    return np.array(out), complete


def _rearrangements(vectors: np.ndarray, classes: np.ndarray, tolerance: float,
                    limit: int) -> tuple[list[np.ndarray], bool]:
    """Source maps (flat position -> the flat position whose coordinates it takes) of the distinct
    rearrangements of ``vectors`` (parallel, series, k) under permutations of whole branches and of
    positions within a branch, every position keeping its class (``classes``); vectors within
    ``tolerance`` of each other count as one. At most ``limit`` of them, and whether that is all.

    Branches alike in classes and coordinates are one: only the distinct branch orders are walked
    (a multiset permutation), so many identical branches cost no factorial."""
    branches, series = classes.shape
    labels = np.empty((branches, series), dtype=np.int64)
    representatives: list[tuple[object, np.ndarray]] = []
    for b in range(branches):
        for i in range(series):
            for number, (key, vector) in enumerate(representatives):
                if key == classes[b, i] and np.linalg.norm(vectors[b, i] - vector) <= tolerance:
                    labels[b, i] = number
                    break
            else:
                labels[b, i] = len(representatives)
                representatives.append((classes[b, i], vectors[b, i]))
    shapes = [tuple(sorted(map(repr, classes[b]))) for b in range(branches)]
    signatures = [(shapes[b], tuple(sorted(labels[b]))) for b in range(branches)]
    kinds = list(dict.fromkeys(signatures))
    members = {kind: [b for b in range(branches) if signatures[b] == kind] for kind in kinds}
    out: list[np.ndarray] = []
    seen: set[tuple] = set()
    for order in _branch_orders(kinds, members, shapes):
        per_branch = [_row_rearrangements(labels[source], classes[source], classes[target],
                                          limit + 1)
                      for target, source in enumerate(order)]
        for rows in itertools.product(*per_branch):
            source_map = np.concatenate([order[t] * series + np.asarray(row, dtype=np.intp)
                                         for t, row in enumerate(rows)])
            signature = tuple(labels.reshape(-1)[source_map])
            if signature in seen:
                continue
            if len(out) == limit:
                return out, False
            seen.add(signature)
            out.append(source_map)
    return out, True


def _branch_orders(kinds: list, members: dict, shapes: list):
    """The distinct orders of the branches, lazily: target branch t takes a source of a kind whose
    class shape matches its own, the first unused branch of that kind."""
    branches = len(shapes)
    counts = {kind: len(members[kind]) for kind in kinds}

    def extend(order: list):
        target = len(order)
        if target == branches:
            yield list(order)
            return
        for kind in kinds:
            if counts[kind] and kind[0] == shapes[target]:
                used = len(members[kind]) - counts[kind]
                counts[kind] -= 1
                order.append(members[kind][used])
                yield from extend(order)
                order.pop()
                counts[kind] += 1

    yield from extend([])


def _row_rearrangements(labels: np.ndarray, source_classes: np.ndarray,
                        target_classes: np.ndarray, limit: int) -> list[list[int]]:
    """The distinct ways (at most ``limit``) to put one branch's positions (``labels``: alike
    ones share a label) into a branch of ``target_classes``, class by class: per target position
    the source position it takes."""
    series = labels.size
    per_class = []
    for key in dict.fromkeys(map(repr, target_classes)):
        targets = [j for j in range(series) if repr(target_classes[j]) == key]
        by_label: dict[int, list[int]] = {}
        for j in range(series):
            if repr(source_classes[j]) == key:
                by_label.setdefault(int(labels[j]), []).append(j)
        counts = {label: len(items) for label, items in by_label.items()}
        ways = []
        for arrangement in itertools.islice(_multiset_permutations(counts, len(targets)), limit):
            used = {label: iter(items) for label, items in by_label.items()}
            ways.append([(targets[k], next(used[label])) for k, label in enumerate(arrangement)])
        per_class.append(ways)
    out = []
    for combination in itertools.islice(itertools.product(*per_class), limit):
        row = [0] * series
        for pairs in combination:
            for target, source in pairs:
                row[target] = source
        out.append(row)
    return out


def _multiset_permutations(counts: dict[int, int], length: int):
    """The distinct orderings of a multiset given as {label: count}, lazily."""
    if length == 0:
        yield ()
        return
    for label in list(counts):
        if counts[label]:
            counts[label] -= 1
            for rest in _multiset_permutations(counts, length - 1):
                yield (label,) + rest
            counts[label] += 1
