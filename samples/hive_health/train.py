"""Baselines and the SELU screening model for the hive-health table.

    cd samples/hive_health && python train.py --table data/inspections_2024.csv
"""

import argparse

import torch
import torch.nn.functional as F
from sklearn.linear_model import LogisticRegression
from sklearn.model_selection import cross_val_score, train_test_split
from sklearn.pipeline import make_pipeline
from sklearn.preprocessing import StandardScaler
from sklearn.svm import SVC
from torch.utils.data import DataLoader, TensorDataset

from model import HiveHealthMLP, LinearProbe
from prep import load_inspections, make_preprocessor, scaled_splits


def parse_args():
    parser = argparse.ArgumentParser()
    parser.add_argument("--table", default="data/inspections_2024.csv")
    parser.add_argument("--epochs", type=int, default=200)
    parser.add_argument("--batch-size", type=int, default=32)
    return parser.parse_args()


def cv_baselines(X, y):
    """Five-fold scores of the two sklearn baselines quoted in the report."""
    svc = make_pipeline(make_preprocessor(), SVC(C=3.0))
    svc_scores = cross_val_score(svc, X, y, cv=5)

    X_scaled = StandardScaler().fit_transform(X)
    logreg_scores = cross_val_score(LogisticRegression(max_iter=1000), X_scaled, y, cv=5)
    return svc_scores.mean(), logreg_scores.mean()


def holdout_logreg(X, y, seed=0):
    X_train, X_test, y_train, y_test = train_test_split(X, y, test_size=0.25, stratify=y, random_state=seed)
    scaler = StandardScaler()
    X_train = scaler.fit_transform(X_train)
    X_test = scaler.fit_transform(X_test)
    clf = LogisticRegression(max_iter=1000).fit(X_train, y_train)
    return clf.score(X_test, y_test)


def evaluate(model, X, y):
    with torch.no_grad():
        logits = model(X)
    accuracy = (logits.argmax(dim=1) == y).float().mean().item()
    return accuracy, F.cross_entropy(logits, y).item()


def fit_torch(model, loader, epochs, weight_decay):
    optimizer = torch.optim.AdamW(model.parameters(), lr=1e-3, weight_decay=weight_decay)
    model.train()
    for _ in range(epochs):
        for xb, yb in loader:
            optimizer.zero_grad()
            F.cross_entropy(model(xb), yb).backward()
            optimizer.step()
    return model


def main():
    args = parse_args()
    X, y = load_inspections(args.table)

    svc_acc, logreg_acc = cv_baselines(X, y)
    print(f"5-fold accuracy: SVC {svc_acc:.3f}  logistic regression {logreg_acc:.3f}")
    print(f"hold-out logistic regression: {holdout_logreg(X, y):.3f}")

    X_train, X_val, y_train, y_val, _ = scaled_splits(X, y)
    X_train = torch.tensor(X_train, dtype=torch.float32)
    X_val = torch.tensor(X_val, dtype=torch.float32)
    y_train = torch.tensor(y_train)
    y_val = torch.tensor(y_val)
    loader = DataLoader(TensorDataset(X_train, y_train), batch_size=args.batch_size, shuffle=True)

    probe = fit_torch(LinearProbe(), loader, epochs=50, weight_decay=0.0)
    mlp = fit_torch(HiveHealthMLP(), loader, epochs=args.epochs, weight_decay=0.01)

    with torch.no_grad():
        probe_acc = (probe(X_val).argmax(dim=1) == y_val).float().mean().item()
    mlp_acc, mlp_loss = evaluate(mlp, X_val, y_val)
    print(f"validation accuracy: probe {probe_acc:.3f}  SELU MLP {mlp_acc:.3f} (loss {mlp_loss:.3f})")
    torch.save(mlp.state_dict(), "checkpoints/hive_health_mlp.pt")


if __name__ == "__main__":
    main()
