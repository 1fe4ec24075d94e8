"""Write the demo data: an invented stress-response circuit of twelve reporter genes.

Everything here is fictional: the gene names, the cell line and the numbers. The model is
a linear Gaussian structural equation model (see pipeline/simulation.py); expression is in
log units. Run from the repository root::

    python data/demo/make_demo.py

It writes measurements.csv, regimes.csv, truth_dag.csv and truth_regimes.csv beside this
script. The seed is fixed: running it again gives the same files, byte for byte.
"""

from __future__ import annotations

import sys
from pathlib import Path

import numpy as np
import pandas as pd

HERE = Path(__file__).resolve().parent
sys.path.insert(0, str(HERE.parents[1]))  # the repository root, for a run without install

from pipeline.fileio import write_text  # noqa: E402
from pipeline.simulation import LinearSEM  # noqa: E402

SEED = 20240622
CELLS = 500  # per regime
DIGITS = "%.3f"

# the genes, upstream first; observational mean level (log units) and noise variance
GENES = {
    "qsn1": (6.0, 0.30),  # osmotic sensor
    "qsn2": (5.5, 0.30),  # redox sensor
    "qtf1": (7.0, 0.25),  # master transcription factor
    "qbf1": (4.5, 0.25),  # buffer protein
    "qtf2": (6.5, 0.25),  # secondary transcription factor
    "qhp1": (8.0, 0.25),  # chaperone 1
    "qhp2": (7.5, 0.25),  # chaperone 2
    "qmt1": (5.0, 0.25),  # metabolic enzyme
    "qlw1": (1.5, 0.04),  # co-chaperone, expressed near the detection floor
    "qfl1": (6.0, 0.25),  # folding reporter
    "qmt2": (4.0, 0.25),  # second metabolic enzyme
    "qrx1": (5.0, 0.25),  # redox reporter
}

# the true circuit: (regulator, regulated) -> weight
EDGES = {
    ("qsn1", "qtf1"): 0.8,
    ("qsn2", "qtf1"): 0.7,
    ("qsn2", "qbf1"): 0.9,
    ("qtf1", "qtf2"): 0.8,
    ("qtf1", "qhp1"): 0.6,
    ("qtf2", "qhp1"): 0.7,
    ("qtf2", "qhp2"): 0.9,
    ("qtf2", "qmt1"): 0.6,
    ("qbf1", "qmt1"): -0.8,
    ("qhp2", "qlw1"): 0.15,
    ("qhp1", "qfl1"): 0.7,
    ("qlw1", "qfl1"): 2.0,
    ("qmt1", "qmt2"): 0.9,
    ("qmt2", "qrx1"): 0.7,
    ("qfl1", "qrx1"): -0.6,
}

# regime -> (declared targets, known, actual actions {gene: (kind, strength)})
REGIMES = {
    "ctrl_a": ((), "yes", {}),
    "ctrl_b": ((), "yes", {}),
    "kd_qtf1": (("qtf1",), "yes", {"qtf1": ("knockdown", 0.6)}),
    "kd_qtf2": (("qtf2",), "yes", {"qtf2": ("knockdown", 0.6)}),
    "kd_qbf1": (("qbf1",), "yes", {"qbf1": ("knockdown", 0.6)}),
    "kd_qhp1": (("qhp1",), "yes", {"qhp1": ("knockdown", 0.6)}),
    "kd_qmt1": (("qmt1",), "yes", {"qmt1": ("knockdown", 0.6)}),
    "kd_qsn2": (("qsn2",), "yes", {}),  # the guide that did not work
    "ko_qlw1": (("qlw1",), "yes", {"qlw1": ("knockout", 0.0)}),  # complete knockout
    "kd_qhp1_qmt2": (("qhp1", "qmt2"), "yes",
                     {"qhp1": ("knockdown", 0.6), "qmt2": ("knockdown", 0.6)}),
    "compound_q": (("qmt1",), "no", {"qmt1": ("knockdown", 0.5), "qsn1": ("knockdown", 0.5)}),
}


def build_model() -> LinearSEM:
    """The circuit as a model whose observational means are the levels in GENES."""
    names = list(GENES)
    model = LinearSEM.from_edges(names, EDGES, {g: v for g, (_, v) in GENES.items()})
    level = np.array([GENES[g][0] for g in names])
    intercept = (np.eye(len(names)) - model.weights) @ level
    return LinearSEM(model.variables, model.weights, model.noise_variance, intercept)


def main() -> None:
    model = build_model()
    rng = np.random.default_rng(SEED)
    blocks = []
    for name, (_, _, actions) in REGIMES.items():
        block = pd.DataFrame(model.sample(CELLS, rng, actions, floor=0.0),
                             columns=list(model.variables))
        block.insert(0, "regime", name)
        blocks.append(block)
    data = pd.concat(blocks, ignore_index=True)
    regimes = pd.DataFrame({"regime": list(REGIMES),
                            "targets": [";".join(t) for t, _, _ in REGIMES.values()],
                            "known": [k for _, k, _ in REGIMES.values()]})
    truth_regimes = pd.DataFrame({"regime": list(REGIMES),
                                  "targets": [";".join(g for g in GENES if g in a)
                                              for _, _, a in REGIMES.values()]})
    dag = pd.DataFrame(list(EDGES), columns=["source", "target"])
    files = {
        "measurements.csv": data.to_csv(index=False, float_format=DIGITS, lineterminator="\n"),
        "regimes.csv": regimes.to_csv(index=False, lineterminator="\n"),
        "truth_dag.csv": dag.to_csv(index=False, lineterminator="\n"),
        "truth_regimes.csv": truth_regimes.to_csv(index=False, lineterminator="\n"),
    }
    for file, text in files.items():
        print(f"wrote {write_text(HERE / file, text)}")


if __name__ == "__main__":
    main()
