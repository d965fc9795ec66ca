"""List the measured values whose molecule gets no estimated site of that kind, by group.

Usage (from the repository root)::

    python scripts/pka_coverage.py [--examples N] [--kind acid|base] [--all]

Reads ../shared/data/pka-train/measured_pka.csv (values -1 ... 13, as the benchmark) and
../shared/data/pka-dev/literature_pka.csv at run time, runs the estimator with the shipped
parameters and, for every value without a site of the right kind (acid / base as the source
reported it), names the functional group most likely responsible, from the descriptive
patterns below (first match wins; they describe structure, they are not the catalogue).
Prints counts per (kind, group) with example SMILES and measured values: each line is a
candidate group class, or a perception problem when the group is already catalogued.
"""
from __future__ import annotations

import argparse
import sys
from pathlib import Path

ROOT = Path(__file__).resolve().parent.parent
sys.path.insert(0, str(ROOT))

#: descriptive functional groups, checked in order (specific first)
FUNCTIONAL_GROUPS = [
    ("N-oxide (aromatic)", "[n+][O-]"),
    ("N-oxide (aliphatic)", "[N+;X4][O-]"),
    ("nitro compound (C-H acid)", "[CX4;!H0][N+](=O)[O-]"),
    ("sulfonylurea", "[NH](C(=O)N)S(=O)=O"),
    ("acylsulfonamide", "[NH](C=O)S(=O)=O"),
    ("sulfonimide / disulfonylamine", "[NH](S(=O)=O)S(=O)=O"),
    ("sulfonamide N-heteroaryl", "[NH](c~n)S(=O)=O"),
    ("sulfonamide N-aryl", "[NH](c)S(=O)=O"),
    ("sulfonamide N-alkyl", "[NH]([CX4])S(=O)=O"),
    ("sulfonamide primary", "[NH2]S(=O)=O"),
    ("sulfonamide N-acyl/other", "[NH]S(=O)=O"),
    ("trifluoromethanesulfonamide", "[NH]S(=O)(=O)C(F)(F)F"),
    ("isatin / cyclic alpha-keto amide", "[NH;R]C(=O)C(=O)"),
    ("rhodanine / thiazolidinone NH", "[NH;R]1C(=[O,S])SC*1"),
    ("rhodanine / thiazolidinone", "S1C(=S)NC(=O)C1"),
    ("cyclic isothiourea / 2-iminothiazoline", "[NX2,NX3;!$(NC=O)]~C1~[#7]~*~*S1"),
    ("2-amino/imino-thiazoline (ring S-C=N)", "[#7]C1=NCCS1"),
    ("dihydrouracil", "O=C1NC(=O)NCC1"),
    ("uracil / pyrimidinedione", "O=c1[nH]c(=O)cc[nH,n]1"),
    ("thioamide / thiourea", "[NX3;!H0]C=S"),
    ("thiourea/thioamide (no NH)", "[NX3]C=S"),
    ("amidoxime", "[NX3]C=N[OH]"),
    ("oxime", "C=N[OH]"),
    ("hydroxamic acid", "C(=O)N[OH]"),
    ("N-hydroxy other", "[#7][OH]"),
    ("urea N-H on heteroaryl", "[NH](c~n)C(=O)N"),
    ("carbamate N-H on heteroaryl", "[NH](c~n)C(=O)O"),
    ("amide N-H on heteroaryl", "[NH](c~n)C(=O)"),
    ("amide N-H on aryl (anilide)", "[NH](c)C(=O)"),
    ("imide (acyclic or cyclic)", "[NH](C=O)C=O"),
    ("urea", "[NX3]C(=O)[NX3]"),
    ("carbamate", "[NX3]C(=O)O"),
    ("primary/secondary amide", "[NX3;!H0]C(=O)"),
    ("1,3-dicarbonyl C-H acid", "[CX4;!H0](C=O)C=O"),
    ("cyano/carbonyl C-H acid", "[CX4;!H0](C#N)[$(C=O),$(C#N),$(S(=O)=O)]"),
    ("sulfonyl C-H acid", "[CX4;!H0](S(=O)=O)[$(C=O),$(S(=O)=O),$(C#N)]"),
    ("ketone alpha C-H / enol", "[CX4;!H0]C(=O)[#6]"),
    ("aromatic N-H (pyrrole/indole/azole)", "[nH]"),
    ("amino-fused azine", "[NX3;!$(NC=O)]c1nc2ccccc2[n,c]c1"),
    ("pteridine-like / polyaza fused", "c1ncc2nccnc2n1"),
    ("fused azine ring N", "[nX2;$(n1ccc2ccccc2c1),$(n1cccc2ccccc12),$(n:c:n)]"),
    ("other ring N (aromatic)", "[nX2]"),
    ("azo / hydrazone", "[#7]=[#7]"),
    ("nitrile", "C#N"),
    ("imine C=N", "[CX3]=[NX2]"),
    ("enamine / vinylogous amide", "[NX3]C=C"),
    ("aniline N (any)", "[NX3;!$(NC=[O,S])]c"),
    ("amine N (any)", "[NX3;!$(N[#6]=[O,S,N])]"),
    ("phenol / enol OH", "[OH]c"),
    ("alcohol OH", "[OH][CX4]"),
    ("carboxylic acid", "C(=O)[OH]"),
    ("S-H / thio", "[SH]"),
    ("P acid", "P(=O)[OH]"),
    ("boron / metal / other", "[B,Si,Se,As,Sn,Hg,Fe,Co,Cu,Zn,Pt]"),
]


def classify(mol, patterns):
    for name, pat in patterns:
        if mol.HasSubstructMatch(pat):
            return name
    return "unclassified"


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--examples", type=int, default=3, help="example molecules per group")
    ap.add_argument("--kind", choices=("acid", "base"), help="only values of this kind")
    ap.add_argument("--min", type=int, default=1, help="hide groups with fewer values")
    args = ap.parse_args(argv)

    from rdkit import Chem

    from saltplan.ionization import calibrate, catalogue

    entries, failed = calibrate.load_calibration_sets()
    if not entries:
        print("no calibration data found under ../shared/data", file=sys.stderr)
        return 1
    rows = calibrate.site_residuals(entries, catalogue.parameters())
    by_smiles = {e.smiles: e for e in entries}
    patterns = [(n, Chem.MolFromSmarts(s)) for n, s in FUNCTIONAL_GROUPS]
    bad = [n for n, p in patterns if p is None]
    if bad:
        print(f"pattern does not parse: {bad[0]}", file=sys.stderr)
        return 1
    table: dict[tuple[str, str], list] = {}
    miss = [r for r in rows if r.atom is None and (args.kind is None or r.kind == args.kind)]
    for r in miss:
        mol = Chem.MolFromSmiles(r.smiles)
        e = by_smiles[r.smiles]
        other = sorted({rec.group.kind for rec in e.perc.records})
        name = classify(mol, patterns) if mol is not None else "unreadable"
        table.setdefault((r.kind or "any", name), []).append((r, other))
    total = len(rows)
    print(f"{total} values, {len(miss)} without a site of the right kind "
          f"({100 * len(miss) / total:.1f} %); {len(failed)} unreadable structures")
    for (kind, name), items in sorted(table.items(), key=lambda kv: (-len(kv[1]), kv[0])):
        if len(items) < args.min:
            continue
        print(f"\n{len(items):5d}  {kind:4s}  {name}")
        for r, other in items[: args.examples]:
            has = ("has " + "/".join(other) + " sites") if other else "no sites"
            print(f"         {r.measured:6.2f}  {r.smiles}   ({has})")
    return 0


if __name__ == "__main__":
    sys.exit(main())
