"""Calibration and fit-check figures of `termination match` on synthetic cases (a script, not a test).

Measurements are made with plain geometry (:func:`termination.testing.geometric_measurement`:
the tilt of a random variant, steps at whole multiples of d, the apparent lattice of a
random termination, each with Gaussian noise), not from the identification model, for
eight cubic prototypes with faces up to index 3 drawn uniformly, mounted on (0 0 1).
Each measurement is matched with a flat prior (the faces were drawn uniformly), and the
top face's probability is compared with whether it is the true face (or one that
predicts the same tilts and plane spacing, which no such measurement can separate).

Prints the expected calibration error (ECE) and the reliability table, for tilt and
steps only and for the full measurement; then the share of measurements of a structure
that the candidate set does not contain that the fit check flags.

    python tests/calibration/run_calibration.py [--cases 2000] [--seed 1]
"""

from __future__ import annotations

import argparse
import time

import numpy as np

from termination.identification.candidates import candidate_table
from termination.identification.likelihood import score
from termination.identification.model import MatchModel
from termination.structures import build_prototype
from termination.testing import calibration, geometric_measurement

PROTOTYPES = (
    "fcc:Cu",
    "bcc:W",
    "rocksalt:Na,Cl",
    "cesium-chloride:Cs,Cl",
    "zincblende:Ga,As",
    "perovskite:Sr,Ti,O",
    "fluorite:Ca,F",
    "half-heusler:Ti,Ni,Sn",
)
MOUNT = (0, 0, 1)
# Pairs (measured structure, candidate structure) for the fit check: the candidates do not contain it.
# Their lattice constants differ by 15 % or more; nearly isostructural pairs (GaAs and CaF2, 3 %)
# are not a wrong structure the tilt, steps and lattice could reveal within 2 % uncertainties.
FOREIGN = (
    ("fcc:Cu", "rocksalt:Na,Cl"),
    ("rocksalt:Na,Cl", "fcc:Cu"),
    ("bcc:W", "perovskite:Sr,Ti,O"),
    ("half-heusler:Ti,Ni,Sn", "cesium-chloride:Cs,Cl"),
    ("perovskite:Sr,Ti,O", "diamond:Si"),
)


def tables(model):
    out = {}
    for spec in PROTOTYPES:
        crystal = build_prototype(spec)
        out[spec] = (crystal, candidate_table(crystal, mount=MOUNT, max_index=3, reconstructions=False, model=model))
    return out


def _signature(table, hkl):
    """What a measurement of tilt and steps sees of a face: its variants' tilts and its plane spacing."""
    c = next(c for c in table.candidates if c.hkl == hkl)
    return (tuple(sorted(round(t, 1) for t in c.tilts)), round(c.d, 3))


def top_class(table, report):
    """Probability of the faces that predict what the top face predicts, and their signature.

    Faces with the same signature (zinc blende (111) and (-1-1-1)) cannot be told apart by
    these measurements; the probability of the answer is the sum over them.
    """
    sig = _signature(table, report.faces[0].hkl)
    p = sum(f.probability for f in report.faces if _signature(table, f.hkl) == sig)
    return p, sig


def run(cases, seed, lattice, model):
    """(top face probabilities, hits) over ``cases`` measurements."""
    rng = np.random.default_rng(seed)
    built = tables(model)
    probs, hits = [], []
    specs = list(built)
    for _ in range(cases):
        spec = specs[int(rng.integers(len(specs)))]
        crystal, table = built[spec]
        faces = sorted({c.hkl for c in table.candidates})
        hkl = faces[int(rng.integers(len(faces)))]
        m = geometric_measurement(crystal, hkl, MOUNT, rng, lattice=lattice)
        report = score(table, m, top=1)
        p, sig = top_class(table, report)
        probs.append(min(p, 1.0))
        hits.append(sig == _signature(table, hkl))
    return np.array(probs), np.array(hits)


def flagged(pairs, cases, seed, model, lattice):
    """Share of measurements that the fit check flags, for (measured, candidate) structure pairs."""
    rng = np.random.default_rng(seed)
    flagged = total = 0
    for measured, candidates in pairs:
        crystal = build_prototype(measured)
        table = candidate_table(
            build_prototype(candidates), mount=MOUNT, max_index=3, reconstructions=False, model=model
        )
        from termination.surface.faces import distinct_faces

        faces = [f.hkl for f in distinct_faces(crystal, 3)]
        for _ in range(cases // len(pairs)):
            hkl = faces[int(rng.integers(len(faces)))]
            m = geometric_measurement(crystal, hkl, MOUNT, rng, lattice=lattice)
            total += 1
            flagged += not score(table, m, top=1).fit.fits
    return flagged / total


def main(argv=None):
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--cases", type=int, default=2000)
    parser.add_argument("--seed", type=int, default=1)
    args = parser.parse_args(argv)
    model = MatchModel(flat_prior=True)
    t0 = time.perf_counter()
    for label, lattice in (("tilt and steps only", False), ("tilt, steps, lattice", True)):
        p, h = run(args.cases, args.seed, lattice, model)
        ece, bins = calibration(p, h)
        worst = max(abs(rate - conf) for conf, rate, n in bins if n >= 20)
        print(
            f"{label}: {len(p)} cases, hit rate {h.mean():.3f}, mean top probability {p.mean():.3f}, "
            f"ECE {ece:.3f}, worst bin (n >= 20) {worst:.3f}"
        )
        for conf, rate, n in bins:
            print(f"    confidence {conf:.3f}  hit rate {rate:.3f}  n = {n}")
    for label, lattice in (("tilt and steps only", False), ("tilt, steps, lattice", True)):
        wrong = flagged(FOREIGN, args.cases // 2, args.seed + 1, MatchModel(), lattice)
        right = flagged([(m, m) for m, _ in FOREIGN], args.cases // 2, args.seed + 2, MatchModel(), lattice)
        print(
            f"fit check, {label}: flags {wrong:.1%} of measurements of a structure not among the candidates, "
            f"{right:.1%} of measurements of the right structure"
        )
    print(f"{time.perf_counter() - t0:.0f} s")


if __name__ == "__main__":
    main()
