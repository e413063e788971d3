#!/usr/bin/python3
"""Oracle for RULES.md section C (data pipeline): measured facts of scikit-learn and torchvision.

    /usr/bin/python3 test/oracle/py/section_c.py [--refit-sample FIXED_DIR]

Prints one JSON object of measurements; no pass/fail decision is made here.
With --refit-sample, FIXED_DIR holds samples/hive_health/train.py as Regwise's fix left it (next to copies of
model.py and prep.py); its holdout_logreg() and the unfixed sample's are run on the same data and compared with
a Pipeline fitted on the same training part.
"""

import importlib.util
import json
import os
import sys
import time

import numpy as np
from sklearn import __version__ as sklearn_version
from sklearn.ensemble import GradientBoostingClassifier
from sklearn.feature_selection import SelectKBest
from sklearn.linear_model import LogisticRegression
from sklearn.metrics import accuracy_score
from sklearn.model_selection import KFold, cross_val_score, train_test_split
from sklearn.pipeline import make_pipeline
from sklearn.preprocessing import Normalizer, StandardScaler

out = {"sklearn": sklearn_version, "sources": {}}
t0 = time.time()


def maxabs(a):
    return float(np.max(np.abs(a)))


# --- leakage through preprocessing fitted before cross-validation --------------
# scikit-learn user guide, "Common pitfalls and recommended practices", data
# leakage example: random labels, 10000 random features, SelectKBest(k=25) fitted
# on all rows before evaluation scores well above chance; inside a Pipeline it
# scores near chance. (memory: that page reports 0.76 leaky vs 0.46 in a Pipeline
# on a single train/test split with GradientBoostingClassifier(random_state=1).)
n_samples, n_features, n_classes = 200, 10000, 2
rng = np.random.RandomState(42)
X = rng.standard_normal((n_samples, n_features))
y = rng.choice(n_classes, n_samples)
cv = KFold(n_splits=5, shuffle=True, random_state=1)

X_selected = SelectKBest(k=25).fit_transform(X, y)
leaky = cross_val_score(GradientBoostingClassifier(random_state=1), X_selected, y, cv=cv)
inside = cross_val_score(make_pipeline(SelectKBest(k=25), GradientBoostingClassifier(random_state=1)), X, y, cv=cv)
out["selection_before_cv"] = {
    "n_samples": n_samples, "n_features": n_features, "k": 25, "folds": 5,
    "chance_level": float(max(np.bincount(y)) / n_samples),
    "leaky_mean_accuracy": float(leaky.mean()),
    "pipeline_mean_accuracy": float(inside.mean()),
}
# The same documentation example as printed there: one train_test_split(random_state=42) after selecting on all
# rows, GradientBoostingClassifier(random_state=1), accuracy on the test part; then the Pipeline version.
X_tr, X_te, y_tr, y_te = train_test_split(X_selected, y, random_state=42)
leaky_split = accuracy_score(y_te, GradientBoostingClassifier(random_state=1).fit(X_tr, y_tr).predict(X_te))
X_tr, X_te, y_tr, y_te = train_test_split(X, y, random_state=42)
pipe_split = make_pipeline(SelectKBest(k=25), GradientBoostingClassifier(random_state=1)).fit(X_tr, y_tr)
out["selection_before_split"] = {
    "leaky_accuracy": float(leaky_split),
    "pipeline_accuracy": float(accuracy_score(y_te, pipe_split.predict(X_te))),
    "test_chance_level": float(max(np.bincount(y_te)) / len(y_te)),
}
out["sources"]["selection_before_cv"] = "scikit-learn docs 'Common pitfalls and recommended practices' (data leakage); Kaufman et al. 2012"


# --- norm-fit-before-split ----------------------------------------------------
# A scaler fitted on all rows depends on the held-out rows; fitted on the training
# part it does not. (scikit-learn docs, Common pitfalls: fit on the training split only.)
rng = np.random.RandomState(0)
D = rng.normal(loc=5.0, scale=2.0, size=(100, 4))
train_idx, hold_idx = np.arange(80), np.arange(80, 100)
D2 = D.copy()
D2[hold_idx] += 3.0  # only held-out rows change
full_a, full_b = StandardScaler().fit(D), StandardScaler().fit(D2)
part_a, part_b = StandardScaler().fit(D[train_idx]), StandardScaler().fit(D2[train_idx])
out["fit_before_split"] = {
    "full_fit_mean_change_when_holdout_changes": maxabs(full_a.mean_ - full_b.mean_),
    "full_fit_scale_change_when_holdout_changes": maxabs(full_a.scale_ - full_b.scale_),
    "train_fit_mean_change_when_holdout_changes": maxabs(part_a.mean_ - part_b.mean_),
    "train_fit_scale_change_when_holdout_changes": maxabs(part_a.scale_ - part_b.scale_),
}
# Normalizer rescales each row by its own norm: fitted on all rows or on the training part, the held-out rows
# come out the same (why norm-fit-before-split leaves it alone).
out["fit_before_split"]["normalizer_full_vs_train_fit_max_abs_diff"] = maxabs(
    Normalizer().fit(D).transform(D[hold_idx]) - Normalizer().fit(D[train_idx]).transform(D[hold_idx]))
out["sources"]["fit_before_split"] = "scikit-learn docs 'Common pitfalls and recommended practices'; scikit-learn docs StandardScaler (mean_, scale_)"


# --- norm-refit-on-holdout ----------------------------------------------------
# fit_transform on test rows re-centres them on themselves, erasing any shift
# between training and test data; transform with the training fit keeps it.
X_train = rng.normal(0.0, 1.0, size=(200, 3))
X_test = rng.normal(0.7, 1.5, size=(50, 3))  # shifted test distribution
sc = StandardScaler().fit(X_train)
refit = StandardScaler().fit_transform(X_test)
kept = sc.transform(X_test)
out["refit_on_holdout"] = {
    "refit_test_feature_means_max_abs": maxabs(refit.mean(axis=0)),
    "refit_test_feature_std_max_abs_dev_from_1": maxabs(refit.std(axis=0) - 1.0),
    "train_fit_test_feature_means": [float(v) for v in kept.mean(axis=0)],
    "train_fit_test_feature_means_min_abs": float(np.min(np.abs(kept.mean(axis=0)))),
}

# After replacing fit_transform(X_test) with transform(X_test), the manual code
# equals a Pipeline fitted on the training part.
yc = (X_train[:, 0] + 0.5 * X_train[:, 1] > 0).astype(int)
manual_scaler = StandardScaler()
clf = LogisticRegression().fit(manual_scaler.fit_transform(X_train), yc)
p_fixed = clf.predict_proba(manual_scaler.transform(X_test))
p_refit = clf.predict_proba(StandardScaler().fit_transform(X_test))
pipe = make_pipeline(StandardScaler(), LogisticRegression()).fit(X_train, yc)
p_pipe = pipe.predict_proba(X_test)
out["refit_on_holdout"].update({
    "transform_vs_pipeline_predict_proba_max_abs_diff": maxabs(p_fixed - p_pipe),
    "fit_transform_vs_pipeline_predict_proba_max_abs_diff": maxabs(p_refit - p_pipe),
})
out["sources"]["refit_on_holdout"] = "scikit-learn docs 'Common pitfalls and recommended practices' (transform the test split); scikit-learn docs Pipeline"


# --- scaled-before-cv ---------------------------------------------------------
# Pre-scaled features: every training fold was scaled with statistics that include
# its validation fold. Measured: the training fold's mean under the global scaler
# vs under a scaler fitted on that fold (what a Pipeline does).
Xs = rng.normal(3.0, 2.0, size=(120, 5))
Xs[:24] += 4.0  # first fold differs, as a site or a season might
global_scaled = StandardScaler().fit_transform(Xs)
fold_train = np.arange(24, 120)
fold_scaled = StandardScaler().fit(Xs[fold_train]).transform(Xs[fold_train])
out["scaled_before_cv"] = {
    "train_fold_mean_under_global_fit_max_abs": maxabs(global_scaled[fold_train].mean(axis=0)),
    "train_fold_mean_under_fold_fit_max_abs": maxabs(fold_scaled.mean(axis=0)),
}
out["sources"]["scaled_before_cv"] = "scikit-learn docs 'Common pitfalls and recommended practices' (use a Pipeline inside cross-validation)"


# --- torchvision: eval-transform-mismatch / augment-on-eval-data ---------------
try:
    import torch
    from PIL import Image
    from torchvision import __version__ as tv_version
    from torchvision import transforms
except Exception as exc:  # noqa: BLE001
    out["torchvision"] = "missing"
    out["torchvision_error"] = str(exc)
else:
    img_rng = np.random.RandomState(11)
    img = Image.fromarray(img_rng.randint(0, 256, size=(80, 96, 3), dtype=np.uint8))
    mean, std = (0.485, 0.456, 0.406), (0.229, 0.224, 0.225)
    random_eval = transforms.Compose([
        transforms.RandomResizedCrop(64), transforms.RandomHorizontalFlip(),
        transforms.ToTensor(), transforms.Normalize(mean, std),
    ])
    fixed_eval = transforms.Compose([
        transforms.Resize(72), transforms.CenterCrop(64),
        transforms.ToTensor(), transforms.Normalize(mean, std),
    ])
    no_norm_eval = transforms.Compose([transforms.Resize(72), transforms.CenterCrop(64), transforms.ToTensor()])
    torch.manual_seed(0)
    r1, r2 = random_eval(img), random_eval(img)
    f1, f2 = fixed_eval(img), fixed_eval(img)
    flip = transforms.RandomHorizontalFlip(p=0.5)
    torch.manual_seed(0)
    flips = [bool(torch.equal(transforms.ToTensor()(flip(img)), transforms.ToTensor()(img))) for _ in range(20)]
    n = no_norm_eval(img)
    out["torchvision"] = {
        "version": tv_version,
        "random_eval_transform_two_calls_differ": not torch.equal(r1, r2),
        "random_eval_transform_two_calls_max_abs_diff": float((r1 - r2).abs().max()),
        "deterministic_eval_transform_two_calls_differ": not torch.equal(f1, f2),
        "horizontal_flip_unchanged_count_of_20": sum(flips),
        "normalized_channel_means": [float(v) for v in f1.mean(dim=(1, 2))],
        "unnormalized_channel_means": [float(v) for v in n.mean(dim=(1, 2))],
        "normalized_vs_unnormalized_max_abs_diff": float((f1 - n).abs().max()),
        "normalize_formula_max_abs_error": float((f1 - (n - torch.tensor(mean)[:, None, None]) / torch.tensor(std)[:, None, None]).abs().max()),
    }
    out["sources"]["torchvision"] = "torchvision docs transforms.Normalize ((x - mean[c]) / std[c]), RandomResizedCrop, RandomHorizontalFlip; ImageNet constants (common practice)"

# --- Regwise's own fix for norm-refit-on-holdout, run on the sample it was made for -----------------------
def holdout_logreg_run(folder, X, y):
    """Imports FOLDER/train.py and runs holdout_logreg(X, y), recording the split it made and the test rows' probabilities."""
    for name in ("model", "prep"):
        sys.modules.pop(name, None)
    sys.path.insert(0, folder)
    try:
        spec = importlib.util.spec_from_file_location(f"hive_train_{len(out)}_{abs(hash(folder))}", os.path.join(folder, "train.py"))
        mod = importlib.util.module_from_spec(spec)
        spec.loader.exec_module(mod)
    finally:
        sys.path.remove(folder)
    seen = {}
    real_split = mod.train_test_split

    def recording_split(*a, **k):
        seen["split"] = real_split(*a, **k)
        return seen["split"]

    class RecordingLogisticRegression(mod.LogisticRegression):
        def score(self, X, y, sample_weight=None):
            seen["proba"] = self.predict_proba(X)
            seen["params"] = self.get_params()
            return super().score(X, y, sample_weight)

    mod.train_test_split = recording_split
    mod.LogisticRegression = RecordingLogisticRegression
    acc = mod.holdout_logreg(X, y)
    X_train, X_test, y_train, y_test = seen["split"]
    pipe = make_pipeline(StandardScaler(), LogisticRegression(**seen["params"])).fit(X_train, y_train)
    return {
        "accuracy": float(acc),
        "pipeline_accuracy": float(pipe.score(X_test, y_test)),
        "predict_proba_max_abs_diff_vs_pipeline": maxabs(seen["proba"] - pipe.predict_proba(X_test)),
    }


if "--refit-sample" in sys.argv:
    fixed_dir = sys.argv[sys.argv.index("--refit-sample") + 1]
    sample_dir = os.path.join(os.path.dirname(os.path.abspath(__file__)), "..", "..", "..", "samples", "hive_health")
    hrng = np.random.RandomState(3)
    Xh = hrng.normal(5.0, 2.0, size=(160, 12)) * np.linspace(0.5, 20.0, 12)
    yh = (Xh[:, 11] / 20.0 + Xh[:, 0] / 4.0 + hrng.normal(scale=0.8, size=160) > 3.0).astype(int) + (Xh[:, 3] > 20.0).astype(int)
    out["refit_fix_sample"] = {
        "original": holdout_logreg_run(os.path.abspath(sample_dir), Xh, yh),
        "fixed": holdout_logreg_run(os.path.abspath(fixed_dir), Xh, yh),
    }
    out["sources"]["refit_fix_sample"] = "scikit-learn docs 'Common pitfalls and recommended practices' (Inconsistent preprocessing); scikit-learn docs Pipeline"

out["seconds"] = round(time.time() - t0, 2)
json.dump(out, sys.stdout, indent=1)
sys.stdout.write("\n")
