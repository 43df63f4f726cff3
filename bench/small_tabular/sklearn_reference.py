"""scikit-learn references for bench/small_tabular/run: the same train/test CSVs chorus reads
(tests/reference/sklearn_table_csv.py), the same test metrics, printed as one JSON object.

Usage: sklearn_reference.py NAME DATA_DIR
Reads DATA_DIR/NAME_train.csv and DATA_DIR/NAME_test.csv (all columns numeric features except
`target`). Features are standardised with a StandardScaler fitted on the train rows only, as chorus
does. NAME diabetes is regression; breast_cancer, wine and digits are classification.

Output: {"name", "task", "train_rows", "test_rows", "methods": {LABEL: {"test": {...},
"seconds": wall time of fit + predict, "notes": {...}}}}.

Regression (test metrics rmse, nll, coverage_90; NLL is the Gaussian's, mean over rows, nats, in
the target's units, like chorus's report):
  "scikit-learn BayesianRidge": BayesianRidge() with its defaults; predictive N(mean, std^2) from
    predict(return_std=True) (std includes the noise variance 1/alpha_: scikit-learn 1.2's
    sklearn/linear_model/_bayes.py adds it to the weights' part).
  "scikit-learn MLP ensemble (5)": five MLPRegressor (settings below, random_state 0..4). An
    MLPRegressor predicts a mean only, so the ensemble's Gaussian predictive is our own
    construction, not scikit-learn's:
      mean     = average of the five members' predictions,
      variance = variance of the five predictions (ddof 0) + s2,
    where s2 is the mean squared residual of the ensemble mean on held-out training rows: the five
    members are first fitted on 80% of the training rows (train_test_split, random_state 0) and s2
    is measured on the other 20%; then the five are refitted on all training rows for the test
    predictions. The members are fitted to the standardised target (train mean and standard
    deviation) and their predictions mapped back, as chorus standardises the target internally.
    Fitted to the raw diabetes target (25..346) instead, in a check we ran, random_state 0 reached
    test RMSE 71 and random_state 1 diverged (RMSE ~7e10).
Classification (test metrics accuracy, nll, brier, ece):
  "scikit-learn LogisticRegressionCV": LogisticRegressionCV(Cs=20, cv=5, scoring="neg_log_loss",
    max_iter=10000): C chosen by 5-fold cross-validated log loss, then refitted on all train rows;
    notes carry the chosen C and how many ConvergenceWarnings the fit raised.
  "scikit-learn MLP ensemble (5)": the average of predict_proba of five MLPClassifier.
MLP settings (the same network and optimiser as the chorus configs in this folder):
hidden_layer_sizes=(64, 64), alpha=1e-3, solver="sgd", learning_rate_init=0.01, momentum=0.9,
batch_size=32, max_iter=100, early_stopping=True, validation_fraction=0.2, random_state=s.
scikit-learn's early stopping scores the held-out 20% by R^2 (regressor) or accuracy (classifier)
and stops after 10 epochs without improvement (n_iter_no_change=10, tol=1e-4; read in scikit-learn
1.2's sklearn/neural_network/_multilayer_perceptron.py); the MLPs' convergence warnings are silenced
(max_iter=100 is part of the setting) and their epochs run (n_iter_) are in the notes.
Metric definitions follow chorus's common/metrics.h: NLL via sklearn.metrics.log_loss; Brier =
sum over classes of (p_k - onehot_k)^2, averaged over rows; ECE below.
"""
import csv
import json
import sys
import time
import warnings

import numpy as np
from scipy.stats import norm
from sklearn.exceptions import ConvergenceWarning
from sklearn.linear_model import BayesianRidge, LogisticRegressionCV
from sklearn.metrics import log_loss
from sklearn.model_selection import train_test_split
from sklearn.neural_network import MLPClassifier, MLPRegressor
from sklearn.preprocessing import StandardScaler

REGRESSION = {"diabetes"}
CLASSIFICATION = {"breast_cancer", "wine", "digits"}
MEMBERS = 5
ECE_BINS = 15
MLP_SETTINGS = dict(hidden_layer_sizes=(64, 64), alpha=1e-3, solver="sgd", learning_rate_init=0.01,
                    momentum=0.9, batch_size=32, max_iter=100, early_stopping=True,
                    validation_fraction=0.2)


def read_csv(path, classify):
    with open(path, newline="") as f:
        rows = list(csv.reader(f))
    header, body = rows[0], rows[1:]
    t = header.index("target")
    x = np.array([[float(v) for i, v in enumerate(r) if i != t] for r in body])
    y = [r[t] for r in body]
    return x, (np.array(y) if classify else np.array([float(v) for v in y]))


def expected_calibration_error(probs, labels, bins=ECE_BINS):
    # Top-label ECE with equal-width confidence bins (Naeini et al., AAAI 2015; Guo et al., ICML
    # 2017): sum over bins of |correct - confidence sum| / N. Bin b holds confidences in
    # (b/B, (b+1)/B], as chorus's common/metrics.cc ConfidenceBin assigns them.
    top = probs.argmax(axis=1)
    conf = probs[np.arange(len(top)), top]
    b = np.clip(np.ceil(conf * bins).astype(int) - 1, 0, bins - 1)
    correct = (top == labels).astype(float)
    gaps = [abs(correct[b == k].sum() - conf[b == k].sum()) for k in range(bins)]
    return float(sum(gaps) / len(labels))


def classification_metrics(probs, y, classes):
    labels = np.searchsorted(classes, y)
    onehot = np.eye(len(classes))[labels]
    return {
        "accuracy": float((probs.argmax(axis=1) == labels).mean()),
        "nll": float(log_loss(labels, probs, labels=np.arange(len(classes)))),
        "brier": float(((probs - onehot) ** 2).sum(axis=1).mean()),
        "ece": expected_calibration_error(probs, labels),
    }


def gaussian_metrics(mean, std, y):
    z90 = norm.ppf(0.95)  # central 90% interval: mean +- z90 std
    nll = 0.5 * np.log(2 * np.pi * std ** 2) + 0.5 * ((y - mean) / std) ** 2
    return {
        "rmse": float(np.sqrt(np.mean((y - mean) ** 2))),
        "nll": float(nll.mean()),
        "coverage_90": float(np.mean(np.abs(y - mean) <= z90 * std)),
    }


def timed(fn):
    start = time.perf_counter()
    test, notes = fn()
    return {"test": test, "seconds": time.perf_counter() - start, "notes": notes}


def mlp_regressors(x, y):
    # Members fitted to the standardised target; returns a function x -> member predictions
    # (members x rows) in the target's units.
    mu, sd = y.mean(), y.std()
    members = [MLPRegressor(random_state=s, **MLP_SETTINGS).fit(x, (y - mu) / sd)
               for s in range(MEMBERS)]
    return lambda rows: np.stack([m.predict(rows) * sd + mu for m in members]), members


def regression(x_tr, y_tr, x_te, y_te):
    def bayesian_ridge():
        model = BayesianRidge().fit(x_tr, y_tr)
        mean, std = model.predict(x_te, return_std=True)
        return gaussian_metrics(mean, std, y_te), {"noise_std": float(model.alpha_ ** -0.5)}

    def mlp_ensemble():
        x_fit, x_held, y_fit, y_held = train_test_split(x_tr, y_tr, test_size=0.2, random_state=0)
        predict_held, _ = mlp_regressors(x_fit, y_fit)
        s2 = float(np.mean((y_held - predict_held(x_held).mean(axis=0)) ** 2))
        predict, members = mlp_regressors(x_tr, y_tr)
        preds = predict(x_te)
        std = np.sqrt(preds.var(axis=0) + s2)
        notes = {"heldout_residual_std": s2 ** 0.5, "mean_member_spread_std":
                 float(np.sqrt(preds.var(axis=0)).mean()),
                 "member_epochs": [m.n_iter_ for m in members]}
        return gaussian_metrics(preds.mean(axis=0), std, y_te), notes

    return {"scikit-learn BayesianRidge": timed(bayesian_ridge),
            "scikit-learn MLP ensemble (5)": timed(mlp_ensemble)}


def classification(x_tr, y_tr, x_te, y_te):
    classes = np.unique(y_tr)

    def logistic():
        model = LogisticRegressionCV(Cs=20, cv=5, scoring="neg_log_loss", max_iter=10000)
        with warnings.catch_warnings(record=True) as caught:
            warnings.simplefilter("always", ConvergenceWarning)
            model.fit(x_tr, y_tr)
        assert list(model.classes_) == list(classes)
        unconverged = sum(issubclass(w.category, ConvergenceWarning) for w in caught)
        return classification_metrics(model.predict_proba(x_te), y_te, classes), \
            {"C": float(model.C_[0]), "convergence_warnings": unconverged}

    def mlp_ensemble():
        probs = np.zeros((len(y_te), len(classes)))
        epochs = []
        for s in range(MEMBERS):
            member = MLPClassifier(random_state=s, **MLP_SETTINGS).fit(x_tr, y_tr)
            assert list(member.classes_) == list(classes)
            probs += member.predict_proba(x_te) / MEMBERS
            epochs.append(member.n_iter_)
        return classification_metrics(probs, y_te, classes), {"member_epochs": epochs}

    return {"scikit-learn LogisticRegressionCV": timed(logistic),
            "scikit-learn MLP ensemble (5)": timed(mlp_ensemble)}


def main():
    if len(sys.argv) != 3 or sys.argv[1] not in REGRESSION | CLASSIFICATION:
        sys.exit(__doc__)
    name, data_dir = sys.argv[1], sys.argv[2]
    classify = name in CLASSIFICATION
    x_tr, y_tr = read_csv(f"{data_dir}/{name}_train.csv", classify)
    x_te, y_te = read_csv(f"{data_dir}/{name}_test.csv", classify)
    scaler = StandardScaler().fit(x_tr)
    x_tr, x_te = scaler.transform(x_tr), scaler.transform(x_te)
    warnings.simplefilter("ignore", ConvergenceWarning)  # MLPs: max_iter=100 is part of the setting
    methods = (classification if classify else regression)(x_tr, y_tr, x_te, y_te)
    print(json.dumps({"name": name, "task": "classification" if classify else "regression",
                      "train_rows": len(y_tr), "test_rows": len(y_te), "methods": methods},
                     indent=1))


if __name__ == "__main__":
    main()
