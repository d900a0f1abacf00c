"""Relating two label-to-point tables: the transform that maps a reference onto a device.

A device's table ``D`` is related to a reference table ``R`` when, for every label ``l``,

    D[l] = g * T(R[s(l)])

with ``T`` the identity or complex conjugation, ``g`` a complex gain (scale and rotation), and
``s`` an affine map of the label bits: a permutation of bit positions followed by an inversion
mask, ``s(l) = P(l) xor c``. Together these cover the defects met when two teams disagree on a
convention: I and Q arms swapped, label bits reversed (LSB first), polarity inverted, a rotation,
a conjugated (spectrally inverted) output. Several descriptions can be the same thing (for QPSK,
swapping the arms is the same as reversing the two bits); :func:`relate` returns all of the
simplest ones.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from .geometry import minimum_distance
from .labels import label_string

#: a device point within this fraction of the minimum distance of the reference point matches
DEFAULT_TOLERANCE = 0.05


@dataclass(frozen=True)
class Relation:
    """One description of how a device table relates to a reference table.

    ``assignment[l]`` is the reference label whose point the device puts at label ``l``.
    ``permutation[i]`` is the reference bit position carried by the device's bit ``i``
    (both counted from the first-fed bit); ``mask`` is the inversion applied after it.
    """

    conjugate: bool
    rotation_deg: float
    scale: float
    permutation: tuple[int, ...] | None
    mask: int | None
    assignment: tuple[int, ...]

    @property
    def bits_per_symbol(self) -> int:
        return len(self.permutation) if self.permutation is not None else \
            int(np.log2(len(self.assignment)))

    @property
    def geometric_steps(self) -> list[str]:
        rot = self.rotation_deg % 360
        if not self.conjugate:
            if rot == 0:
                return []
            if rot == 180:
                return ["rotated by 180 degrees (both arms inverted)"]
            return [f"rotated by {_fmt_deg(rot)} degrees"]
        if rot == 0:
            return ["conjugated (Q arm inverted)"]
        if rot == 180:
            return ["I arm inverted"]
        if rot == 90:
            return ["I and Q arms swapped"]
        if rot == 270:
            return ["I and Q arms swapped and both inverted"]
        return [f"conjugated, then rotated by {_fmt_deg(rot)} degrees"]

    @property
    def bit_steps(self) -> list[str]:
        if self.permutation is None:
            return ["labels reassigned (no bit reordering or inversion explains it)"]
        k = len(self.permutation)
        steps = []
        perm = tuple(self.permutation)
        if perm == tuple(range(k - 1, -1, -1)) and k > 1:
            steps.append("label bits reversed (LSB first)")
        elif perm != tuple(range(k)):
            order = ", ".join(f"b{p}" for p in perm)
            steps.append(f"label bits reordered: device bits carry reference bits ({order})")
        if self.mask:
            bits = [i for i in range(k) if (self.mask >> (k - 1 - i)) & 1]
            if len(bits) == k:
                steps.append("all label bits inverted")
            else:
                steps.append("label bit" + ("s " if len(bits) > 1 else " ")
                             + ", ".join(f"b{i}" for i in bits) + " inverted")
        return steps

    @property
    def steps(self) -> list[str]:
        """The elementary steps, geometric first; empty for an exact match."""
        return self.geometric_steps + self.bit_steps

    @property
    def cost(self) -> int:
        return len(self.steps) + (0 if self.permutation is not None else 10)

    def describe(self) -> str:
        return " + ".join(self.steps) if self.steps else "identical"

    def to_json(self) -> dict:
        return {
            "description": self.describe(),
            "steps": self.steps,
            "conjugate": self.conjugate,
            "rotation_deg": self.rotation_deg,
            "scale": self.scale,
            "bit_permutation": list(self.permutation) if self.permutation is not None else None,
            "inversion_mask": (label_string(self.mask, self.bits_per_symbol)
                               if self.mask is not None else None),
        }


def _fmt_deg(x: float) -> str:
    return f"{x:g}" if abs(x - round(x)) > 1e-6 else str(int(round(x)))


def _match(device: np.ndarray, candidate: np.ndarray, tol: float) -> np.ndarray | None:
    """Assignment device label -> candidate label when the point sets coincide, else None."""
    d = np.abs(device[:, None] - candidate[None, :])
    nearest = d.argmin(axis=1)
    if np.max(d[np.arange(len(device)), nearest]) > tol:
        return None
    if len(np.unique(nearest)) != len(device):
        return None
    return nearest


def _affine_bits(assignment: np.ndarray, k: int):
    """(permutation, mask) with assignment[l] == P(l) ^ mask for all l, or (None, None)."""
    mask = int(assignment[0])
    perm = [0] * k
    used = set()
    for i in range(k):  # device bit i (from the first-fed bit) has integer weight 2**(k-1-i)
        col = int(assignment[1 << (k - 1 - i)]) ^ mask
        if col == 0 or col & (col - 1):
            return None, None
        ref_pos = k - 1 - col.bit_length() + 1
        if ref_pos in used:
            return None, None
        used.add(ref_pos)
        perm[i] = ref_pos
    labels = np.arange(1 << k, dtype=np.int64)
    mapped = np.zeros_like(labels)
    for i, p in enumerate(perm):
        mapped |= ((labels >> (k - 1 - i)) & 1) << (k - 1 - p)
    if not np.array_equal(mapped ^ mask, assignment):
        return None, None
    return tuple(perm), mask


def _round_angle(rad: float, step_deg: float = 1e-3) -> float:
    deg = np.degrees(rad) % 360
    deg = round(deg / step_deg) * step_deg
    return 0.0 if abs(deg - 360) < step_deg or abs(deg) < step_deg else float(deg)


def candidate_relations(reference: np.ndarray, device: np.ndarray,
                        tolerance: float = DEFAULT_TOLERANCE) -> list[Relation]:
    """Every relation (conjugation, gain, bit map) under which the device table is the reference.

    Gains are found by pairing the device's largest point with each of the reference's largest
    points, so only symmetries of the constellation are tried; a device whose point set is not
    the reference's (up to scale and rotation) has no relation.
    """
    ref = np.asarray(reference, dtype=np.complex128)
    dev = np.asarray(device, dtype=np.complex128)
    if ref.shape != dev.shape or not np.all(np.isfinite(dev)):
        return []
    k = int(np.log2(len(ref)))
    rms_dev = np.sqrt(np.mean(np.abs(dev) ** 2))
    if rms_dev == 0:
        return []
    anchor = int(np.argmax(np.abs(dev)))
    out: list[Relation] = []
    seen = set()
    for conj in (False, True):
        r = np.conj(ref) if conj else ref
        mags = np.abs(r)
        for j in np.nonzero(mags >= mags.max() * (1 - 1e-6))[0]:
            g = dev[anchor] / r[j]
            cand = g * r
            tol = tolerance * minimum_distance(cand)
            assignment = _match(dev, cand, tol)
            if assignment is None:
                continue
            # refine the gain by least squares over all points
            g = np.vdot(r[assignment], dev) / np.vdot(r[assignment], r[assignment])
            rot = _round_angle(np.angle(g))
            key = (conj, rot, tuple(assignment.tolist()))
            if key in seen:
                continue
            seen.add(key)
            perm, mask = _affine_bits(assignment, k)
            out.append(Relation(conjugate=conj, rotation_deg=rot, scale=float(abs(g)),
                                permutation=perm, mask=mask,
                                assignment=tuple(int(a) for a in assignment)))
    return out


def relate(reference: np.ndarray, device: np.ndarray,
           tolerance: float = DEFAULT_TOLERANCE) -> list[Relation]:
    """The simplest equivalent descriptions of the device table in terms of the reference.

    Returns an empty list when the point sets differ. The first entry is the one to report;
    the others describe the same table in other words.

    Examples
    --------
    >>> from modemverify.schemes.conventions import get_convention
    >>> ref = get_convention("3gpp", "qpsk").points
    >>> swapped = ref.imag + 1j * ref.real
    >>> [r.describe() for r in relate(ref, swapped)]
    ['label bits reversed (LSB first)', 'I and Q arms swapped']
    """
    rels = candidate_relations(reference, device, tolerance)
    if not rels:
        return []
    best = min(r.cost for r in rels)
    simplest = [r for r in rels if r.cost == best]
    simplest.sort(key=_specificity)
    return simplest


def _specificity(r: Relation):
    """Order equally simple descriptions: named bit steps (reversed, inverted) first, then named
    geometric steps (arms swapped, rotated), then a generic bit reordering."""
    generic = any(s.startswith("label bits reordered") for s in r.bit_steps)
    named_bits = bool(r.bit_steps) and not generic
    return (0 if named_bits else 2 if generic else 1, r.conjugate, r.rotation_deg)


def differing_labels(reference: np.ndarray, device: np.ndarray,
                     tolerance: float = DEFAULT_TOLERANCE) -> tuple[float, list[int]]:
    """Positive real gain and the labels whose device point is not the reference's.

    The gain is the RMS ratio of the two tables, which (unlike a least-squares fit) does not
    collapse when labels are merely reassigned; each label's deviation is then measured in units
    of the minimum distance.
    """
    ref = np.asarray(reference, dtype=np.complex128)
    dev = np.asarray(device, dtype=np.complex128)
    if not np.all(np.isfinite(dev)):
        return float("nan"), [int(i) for i in np.nonzero(~np.isfinite(dev))[0]]
    g = float(np.sqrt(np.mean(np.abs(dev) ** 2) / np.mean(np.abs(ref) ** 2)))
    if g == 0:
        return 0.0, list(range(len(ref)))
    err = np.abs(dev - g * ref) / (g * minimum_distance(ref))
    bad = np.nonzero(~(err <= tolerance))[0]
    return g, [int(b) for b in bad]


def identity_assignment(reference: np.ndarray, device: np.ndarray, gain: float,
                        tolerance: float = DEFAULT_TOLERANCE) -> np.ndarray | None:
    """Reference label whose point each device label sits on (no rotation), or None."""
    ref = gain * np.asarray(reference, dtype=np.complex128)
    return _match(np.asarray(device, dtype=np.complex128), ref,
                  tolerance * minimum_distance(ref))


def describe_reassignment(assignment: tuple[int, ...], k: int) -> str:
    """Name a label reassignment: trades of places when it is made of swaps, else a list."""
    a = np.asarray(assignment)
    moved = np.nonzero(a != np.arange(len(a)))[0]
    pairs = [(i, int(a[i])) for i in moved if a[a[i]] == i and i < a[i]]
    if pairs and 2 * len(pairs) == len(moved):
        return "; ".join(f"labels {label_string(i, k)} and {label_string(j, k)} trade places"
                         for i, j in pairs)
    shown = "; ".join(f"{label_string(i, k)} is at the point of {label_string(int(a[i]), k)}"
                      for i in moved[:6])
    return f"{len(moved)} labels moved: {shown}" + (" ..." if len(moved) > 6 else "")


__all__ = [
    "Relation", "relate", "candidate_relations", "differing_labels", "identity_assignment",
    "describe_reassignment", "DEFAULT_TOLERANCE", "explain_difference", "explain_rings",
    "explain_rule",
]


def explain_rings(reference: np.ndarray, device: np.ndarray,
                  tolerance: float = DEFAULT_TOLERANCE) -> str | None:
    """For a constellation on several rings (APSK): "ring ratio 2.85 instead of 3.15" when the
    device's points sit at the reference's angles and differ only in their ring radii; else
    None. Ratios are of each ring to the innermost."""
    ref = np.asarray(reference, dtype=np.complex128)
    dev = np.asarray(device, dtype=np.complex128)
    if ref.shape != dev.shape or not np.all(np.isfinite(dev)):
        return None
    radii = np.abs(ref)
    rings = np.unique(np.round(radii / radii.max(), 6))
    if len(rings) < 2:
        return None
    ring_of = np.searchsorted(rings, np.round(radii / radii.max(), 6))
    dev_r = np.array([np.mean(np.abs(dev[ring_of == i])) for i in range(len(rings))])
    if not np.all(dev_r > 0):
        return None
    # the device with each ring moved to the reference's radius must be the reference
    g = dev_r[0] / (rings[0] * radii.max())
    fixed = dev * (rings[ring_of] * radii.max() / dev_r[ring_of]) * g
    if np.max(np.abs(fixed - g * ref)) > tolerance * g * minimum_distance(ref):
        return None
    ref_ratio, dev_ratio = rings[1:] / rings[0], dev_r[1:] / dev_r[0]
    if np.allclose(ref_ratio, dev_ratio, rtol=1e-3):
        return None
    return "; ".join(f"ring ratio {d:.2f} instead of {r:.2f}"
                     + (f" (ring {i + 2} to ring 1)" if len(rings) > 2 else "")
                     for i, (d, r) in enumerate(zip(dev_ratio, ref_ratio)))


def explain_rule(found: str, claimed_rule, *, name: str) -> str:
    """The reason when the device follows another symbol rule than the claimed one: ``found``
    says how (from :func:`~modemverify.schemes.rules.rule_family`)."""
    return (f"{found} (claimed, by the {name} convention: {claimed_rule.describe()}); read "
            f"that way, the device's table is the {name} table")


def _reversed_increments(rels: list[Relation]) -> Relation | None:
    for r in rels:
        if (r.conjugate and r.rotation_deg == 0 and r.mask == 0 and r.permutation is not None
                and tuple(r.permutation) == tuple(range(len(r.permutation)))):
            return r
    return None


def explain_difference(reference: np.ndarray, device: np.ndarray, bad: list[int], gain: float,
                       k: int, tolerance: float = DEFAULT_TOLERANCE, *, name: str,
                       subject: str = "device table",
                       differential: bool = False) -> tuple[str, list[Relation]]:
    """Why ``device`` is not ``reference`` (``bad`` from :func:`differing_labels`): one line
    naming the simplest transform and its equivalents, the labels that trade places, or the
    points that are not on the constellation; with the relations found.

    ``name`` names the reference in the text (``"3gpp"``: "the 3gpp table", "3gpp points");
    ``subject`` names the device's table.
    """
    n = len(device)
    rels = relate(reference, device, tolerance)
    if differential:
        # the table is of phase changes: a conjugated table is a phase that turns the other way
        subject = "device's phase-change table"
        rev = _reversed_increments(rels)
        if rev is not None:
            also = [r.describe() for r in rels if r is not rev]
            return ("phase increments reversed: each label turns the phase the other way "
                    f"(the {name} phase-change table conjugated"
                    + (f"; the same as: {'; '.join(also)}" if also else "") + ")"), rels
    rings = explain_rings(reference, device, tolerance)
    if rings is not None:
        return f"{subject}: {rings} (the points are at the {name} angles)", rels
    if rels and rels[0].permutation is not None and rels[0].cost > 0:
        also = [r.describe() for r in rels[1:]]
        return (f"{subject} is the {name} table with {rels[0].describe()}"
                + (f" (the same as: {'; '.join(also)})" if also else "")), rels
    moved = identity_assignment(reference, device, gain, tolerance)
    if moved is not None:
        return (f"{len(bad)} of {n} labels are at other {name} points, not explained by a bit "
                f"reordering, inversion or symmetry: "
                f"{describe_reassignment(tuple(moved.tolist()), k)}"), rels
    if rels:
        return (f"{len(bad)} of {n} labels differ from {name}, even after "
                f"{' + '.join(rels[0].geometric_steps)}: "
                f"{describe_reassignment(rels[0].assignment, k)}"), rels
    listed = ", ".join(label_string(l, k) for l in bad[:8])
    return (f"{len(bad)} of {n} points are not on the {name} constellation: labels {listed}"
            f"{' ...' if len(bad) > 8 else ''}"), rels
