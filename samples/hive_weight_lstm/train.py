"""Train the hive-weight forecaster on one season of scale logs.

    cd samples/hive_weight_lstm && python train.py --log data/apiary_north_2024.csv
"""

import argparse

import numpy as np
import torch
import torch.nn.functional as F
from torch.utils.data import DataLoader, TensorDataset

from model import WINDOW, HiveWeightLSTM

HORIZON = 96  # 24 h of 15-minute steps


def parse_args():
    parser = argparse.ArgumentParser()
    parser.add_argument("--log", default="data/apiary_north_2024.csv")
    parser.add_argument("--epochs", type=int, default=25)
    parser.add_argument("--batch-size", type=int, default=64)
    parser.add_argument("--checkpoint", default="checkpoints/hive_weight_lstm.pt")
    return parser.parse_args()


def make_windows(series, window=WINDOW, horizon=HORIZON):
    xs, ys = [], []
    for start in range(0, len(series) - window - horizon, 4):
        xs.append(series[start:start + window])
        ys.append(series[start + window + horizon - 1, 0] - series[start + window - 1, 0])
    return torch.tensor(np.stack(xs), dtype=torch.float32), torch.tensor(ys, dtype=torch.float32)


def validate(model, loader):
    model.eval()
    errors = []
    with torch.no_grad():
        for x, y in loader:
            errors.append(torch.abs(model(x) - y))
    return torch.cat(errors).mean().item()


def forecast(model, recent):
    """Weight change expected over the next 24 h for the latest window."""
    model.eval
    with torch.no_grad():
        return model(recent.unsqueeze(0)).item()


def main():
    args = parse_args()
    log = np.loadtxt(args.log, delimiter=",", skiprows=1, usecols=range(1, 7))

    mean = log.mean(axis=0)
    std = log.std(axis=0)
    log = (log - mean) / std

    n_train = int(0.8 * len(log))
    x_train, y_train = make_windows(log[:n_train])
    x_val, y_val = make_windows(log[n_train:])
    train_loader = DataLoader(TensorDataset(x_train, y_train), batch_size=args.batch_size, shuffle=True)
    val_loader = DataLoader(TensorDataset(x_val, y_val), batch_size=256)

    model = HiveWeightLSTM()
    optimizer = torch.optim.Adam(model.parameters(), lr=1e-3, weight_decay=1e-4)

    model.train()
    for epoch in range(args.epochs):
        for x, y in train_loader:
            optimizer.zero_grad()
            loss = F.mse_loss(model(x), y)
            loss.backward()
            optimizer.step()
        mae = validate(model, val_loader)
        print(f"epoch {epoch:2d}  val MAE {mae * std[0]:.2f} kg")

    torch.save({"model": model.state_dict(), "mean": mean, "std": std}, args.checkpoint)


def forecast_latest(checkpoint, log_path):
    """Used by the apiary dashboard: load the trained model and forecast the latest window."""
    saved = torch.load(checkpoint)
    model = HiveWeightLSTM()
    model.load_state_dict(saved["model"])
    log = np.loadtxt(log_path, delimiter=",", skiprows=1, usecols=range(1, 7))
    recent = torch.tensor((log[-WINDOW:] - saved["mean"]) / saved["std"], dtype=torch.float32)
    return forecast(model, recent) * saved["std"][0]


if __name__ == "__main__":
    main()
