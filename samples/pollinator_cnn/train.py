"""Train the pollinator crop classifier.

    cd samples && python -m pollinator_cnn.train --config pollinator_cnn/configs/run.yaml
"""

import argparse

import torch
import torch.nn.functional as F
import yaml
from torch.utils.data import DataLoader

from pollinator_cnn import NUM_CLASSES
from pollinator_cnn.data import crop_folder, eval_transform, train_transform
from pollinator_cnn.models import PollinatorNet


def parse_args():
    parser = argparse.ArgumentParser(description="Train the pollinator crop classifier")
    parser.add_argument("--config", default="configs/run.yaml")
    parser.add_argument("--epochs", type=int, default=30)
    parser.add_argument("--workers", type=int, default=4)
    parser.add_argument("--out", default="checkpoints/pollinator_net.pt")
    return parser.parse_args()


def train_one_epoch(model, loader, optimizer, device):
    model.train()
    total = 0.0
    for images, labels in loader:
        images, labels = images.to(device), labels.to(device)
        optimizer.zero_grad()
        loss = F.cross_entropy(model(images), labels)
        loss.backward()
        optimizer.step()
        total += loss.item() * images.size(0)
    return total / len(loader.dataset)


def evaluate(model, loader, device):
    model.eval()
    correct = 0
    with torch.no_grad():
        for images, labels in loader:
            logits = model(images.to(device))
            correct += (logits.argmax(dim=1).cpu() == labels).sum().item()
    return correct / len(loader.dataset)


def main():
    args = parse_args()
    with open(args.config) as fh:
        cfg = yaml.safe_load(fh)

    device = torch.device("cuda" if torch.cuda.is_available() else "cpu")
    train_set = crop_folder(cfg["data"]["root"], "train", train_transform)
    val_set = crop_folder(cfg["data"]["root"], "val", eval_transform)
    train_loader = DataLoader(train_set, batch_size=cfg["train"]["batch_size"], shuffle=True,
                              num_workers=args.workers, drop_last=True)
    val_loader = DataLoader(val_set, batch_size=cfg["eval"]["batch_size"], num_workers=args.workers)

    model = PollinatorNet(num_classes=NUM_CLASSES).to(device)
    optimizer = torch.optim.SGD(model.parameters(), lr=cfg["train"]["lr"], momentum=cfg["train"]["momentum"], weight_decay=cfg["train"]["weight_decay"])
    scheduler = torch.optim.lr_scheduler.CosineAnnealingLR(optimizer, T_max=args.epochs)

    best = 0.0
    for epoch in range(args.epochs):
        loss = train_one_epoch(model, train_loader, optimizer, device)
        acc = evaluate(model, val_loader, device)
        scheduler.step()
        print(f"epoch {epoch:3d}  loss {loss:.4f}  val acc {acc:.3f}")
        if acc > best:
            best = acc
            torch.save(model.state_dict(), args.out)


if __name__ == "__main__":
    main()
