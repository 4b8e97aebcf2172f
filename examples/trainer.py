"""A command-line trainer for curvefit's --command: train on one CSV, predict another.

    python examples/trainer.py [--model linear|knn] [--k K] TRAIN.csv TEST.csv PREDICTIONS.txt

TRAIN.csv holds a header row, the feature columns and the label column ``target`` (the
last column); TEST.csv the same feature columns. One prediction per test row is
written to PREDICTIONS.txt. Only numpy is needed, so the script stands for any program
curvefit cannot import (another language, a container, a remote job).

* ``--model linear``: least-squares linear classifier with a bias on the label codes
  (a linear threshold rule, VC dimension d + 1 in R^d);
* ``--model knn --k K``: k-nearest-neighbour majority vote (Euclidean distance), whose
  complexity falls as k grows.

Examples (from the repository root):

    curvefit capacity --probe --n-features 3 \
        --command "python examples/trainer.py --model linear {train} {test} {predictions}"
    curvefit tradeoff data.csv --target label --vary k=1,5,25 --sizes 50,200 \
        --command "python examples/trainer.py --model knn --k {value} {train} {test} {predictions}"
"""

from __future__ import annotations

import argparse
import csv

import numpy as np


def read_table(path: str) -> tuple[list[str], list[list[str]]]:
    with open(path, newline="") as f:
        rows = list(csv.reader(f))
    return rows[0], rows[1:]


def main() -> None:
    p = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    p.add_argument("--model", choices=["linear", "knn"], default="linear")
    p.add_argument("--k", type=int, default=1)
    p.add_argument("train")
    p.add_argument("test")
    p.add_argument("predictions")
    args = p.parse_args()
    header, train = read_table(args.train)
    _, test = read_table(args.test)
    n_features = len(header) - 1                       # the label is the last column
    X = np.array([[float(v) for v in r[:n_features]] for r in train])
    labels = [r[n_features] for r in train]
    classes = sorted(set(labels))
    codes = np.array([classes.index(v) for v in labels])
    T = np.array([[float(v) for v in r[:n_features]] for r in test]).reshape(len(test), n_features)
    if args.model == "linear":
        A = np.hstack([X, np.ones((len(X), 1))])
        B = np.hstack([T, np.ones((len(T), 1))])
        onehot = np.eye(len(classes))[codes]
        w, *_ = np.linalg.lstsq(A, onehot, rcond=None)
        pred = np.argmax(B @ w, axis=1)
    else:
        k = max(1, min(args.k, len(X)))
        dist = ((T[:, None, :] - X[None, :, :]) ** 2).sum(axis=2)
        nearest = np.argsort(dist, axis=1, kind="stable")[:, :k]
        votes = np.apply_along_axis(np.bincount, 1, codes[nearest], minlength=len(classes))
        pred = np.argmax(votes, axis=1)
    with open(args.predictions, "w") as f:
        f.writelines(f"{classes[i]}\n" for i in pred)


if __name__ == "__main__":
    main()
