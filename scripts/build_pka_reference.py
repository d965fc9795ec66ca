"""Build the measured-site reference table shipped in saltplan/ionization/data/.

Reads ../shared/data/pka-train/measured_pka.csv (a literature compilation; see its README
for the attribution), matches every measured value in -1 ... 13 to the closest estimated
site of the kind the source reports, and writes

* ``measured_sites.npz``: packed site-rooted environment fingerprints (uint64), measured
  value, estimator residual (measured - estimate, before any analogue correction), class
  index and site atom per row;
* ``measured_sites.json``: header (attribution, build date, estimator parameters used,
  fingerprint definition, counts) and the text columns (parent SMILES, InChIKey, scaffold
  group, source line) in the same row order.

The residuals depend on the estimator's parameters: rebuild after every refit
(``python scripts/fit_pka.py`` → ``python scripts/build_pka_reference.py`` →
``python scripts/fit_analogues.py``).

    python scripts/build_pka_reference.py [--data PATH] [--out DIR]
"""
from __future__ import annotations

import argparse
import datetime as dt
import hashlib
import json
import sys
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parent.parent
DATA = ROOT.parent / "shared" / "data" / "pka-train" / "measured_pka.csv"
OUT = ROOT / "saltplan" / "ionization" / "data"


def main(argv=None) -> int:
    import numpy as np

    from saltplan.ionization import analogues, catalogue
    from saltplan.ionization.reference import MAX_RESIDUAL, reference_rows, usable

    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--data", type=Path, default=DATA)
    ap.add_argument("--out", type=Path, default=OUT)
    args = ap.parse_args(argv)
    if not args.data.is_file():
        print(f"{args.data}: not found", file=sys.stderr)
        return 1
    t0 = time.perf_counter()
    rows, skipped = reference_rows(args.data, catalogue.parameters(), analogues.FINGERPRINT,
                                   log=print)
    n_all = len(rows)
    rows = usable(rows)
    skipped[f"residual beyond {MAX_RESIDUAL:g} (other site / equilibrium)"] = n_all - len(rows)
    keys = sorted({(r["group_id"], r["kind"]) for r in rows})
    kidx = {k: i for i, k in enumerate(keys)}
    rows.sort(key=lambda r: (kidx[(r["group_id"], r["kind"])], r["line"]))
    fitted = catalogue.fitted_source() or "published priors (no fitted file)"
    digest = hashlib.sha256(args.data.read_bytes()).hexdigest()[:16]
    header = {
        "format": analogues.FORMAT,
        "title": "measured ionizable sites with their environment fingerprints",
        "attribution": analogues.ATTRIBUTION,
        "attribution_note": "Attribute the source as above wherever the data or anything "
                            "fitted on it is used (pka-train README).",
        "built_from": f"../shared/data/pka-train/measured_pka.csv (sha256 {digest}...)",
        "built_by": "scripts/build_pka_reference.py",
        "built_on": dt.date.today().isoformat(),
        "estimator_parameters": fitted,
        "matching": "each measured value in -1 ... 13 -> closest returned site of the kind the "
                    "source reports (strongest acidic -> acid, strongest basic -> base)",
        "residual": "measured - estimate (estimator alone, before the analogue correction)",
        "scaffold": "calibrate.scaffold_group: Bemis-Murcko framework (ring:...); acyclic "
                    "molecules by their generic chain skeleton (chain:...)",
        "fingerprint": dict(analogues.FINGERPRINT,
                            definition="Morgan environments (RDKit default invariants) of "
                                       "radius 0..radius of every atom within depth bonds of "
                                       "the site, tagged with the distance, folded to bits"),
        "rows": len(rows),
        "skipped": skipped,
    }
    doc = {"header": header, "class_keys": [list(k) for k in keys],
           "smiles": [r["smiles"] for r in rows], "inchikey": [r["inchikey"] for r in rows],
           "scaffold": [r["scaffold"] for r in rows], "source": [r["source"] for r in rows]}
    words = analogues.FINGERPRINT["bits"] // 64
    fps = np.stack([r["fp"] for r in rows]) if rows else np.zeros((0, words), np.uint64)
    args.out.mkdir(parents=True, exist_ok=True)
    npz = args.out / analogues.TABLE_NPZ
    js = args.out / analogues.TABLE_JSON
    tmp_npz = npz.with_suffix(".tmp.npz")
    tmp_js = js.with_suffix(".tmp.json")
    np.savez_compressed(tmp_npz, fps=fps.astype(np.uint64),
                        measured=np.array([r["measured"] for r in rows], np.float32),
                        residual=np.array([r["residual"] for r in rows], np.float32),
                        cls=np.array([kidx[(r["group_id"], r["kind"])] for r in rows], np.int16),
                        atom=np.array([r["atom"] for r in rows], np.int16))
    tmp_js.write_text(json.dumps(doc, ensure_ascii=False, separators=(",", ":"), sort_keys=False)
                      + "\n", encoding="utf-8")
    tmp_npz.replace(npz)
    tmp_js.replace(js)
    analogues.shipped_table.cache_clear()
    table = analogues.ReferenceTable.load()   # read back: same checks as at run time
    print(f"{len(table)} measured sites in {len(keys)} classes; skipped {skipped}")
    print(f"{npz.name} {npz.stat().st_size / 1024:.0f} KiB, {js.name} {js.stat().st_size / 1024:.0f} KiB "
          f"({time.perf_counter() - t0:.0f} s)")
    return 0


if __name__ == "__main__":
    sys.exit(main())
