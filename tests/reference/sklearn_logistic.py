"""MAP weights of chorus's FitLaplaceLogisticRegression (common/linear_baseline.h) at a fixed prior
precision ALPHA, computed with scikit-learn's LogisticRegression(C = 1 / ALPHA).

Usage: sklearn_logistic.py DIR ALPHA
For scikit-learn's bundled breast_cancer (569 x 30, 2 classes) and wine (178 x 13, 3 classes):
train_test_split(test_size=0.25, random_state=0, stratify=y), StandardScaler fitted on the train
split, values rounded to float32 as chorus reads them; writes DIR/<name>_{x,y}_{train,test}.txt
(matrix text; y as a column of class indices) and prints <name>_coef (outputs x features, row
by row) and <name>_intercept of the fit on the train split.
The objective is sum_i -ln p(y_i | x_i) + ||coef||^2 / (2 C): in scikit-learn 1.2 both lbfgs and
newton-cg minimise LinearModelLoss, whose L2 term leaves the intercept out. Two classes: one logit
(multi_class="auto" picks ovr; "multinomial" would split the logit over two penalised softmax rows
and halve its penalty). Three classes: softmax ("auto" picks multinomial). newton-cg with tol=1e-8
(largest gradient entry) is used because lbfgs stops at L-BFGS-B's default ftol (factr 1e7, a
relative objective change of 2.2e-9) whatever tol is, leaving the coefficients ~1e-4 from the MAP.
"""
import sys
import warnings

import numpy as np
from sklearn.datasets import load_breast_cancer, load_wine
from sklearn.linear_model import LogisticRegression
from sklearn.model_selection import train_test_split
from sklearn.preprocessing import StandardScaler

from matrix_text import print_vector, write_matrix


def main():
    out_dir, alpha = sys.argv[1], float(sys.argv[2])
    warnings.simplefilter("error")  # a ConvergenceWarning fails the script
    for name, load in (("breast_cancer", load_breast_cancer), ("wine", load_wine)):
        x, y = load(return_X_y=True)
        x_tr, x_te, y_tr, y_te = train_test_split(x, y, test_size=0.25, random_state=0, stratify=y)
        scaler = StandardScaler().fit(x_tr)
        x_tr = scaler.transform(x_tr).astype(np.float32).astype(np.float64)
        x_te = scaler.transform(x_te).astype(np.float32).astype(np.float64)
        for part, xs, ys in (("train", x_tr, y_tr), ("test", x_te, y_te)):
            write_matrix(f"{out_dir}/{name}_x_{part}.txt", xs)
            write_matrix(f"{out_dir}/{name}_y_{part}.txt", ys[:, None])
        model = LogisticRegression(C=1 / alpha, penalty="l2", solver="newton-cg", tol=1e-8,
                                   max_iter=10000).fit(x_tr, y_tr)
        print_vector(f"{name}_coef", model.coef_)
        print_vector(f"{name}_intercept", model.intercept_)


if __name__ == "__main__":
    main()
