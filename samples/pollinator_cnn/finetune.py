"""Fine-tune the multi-scale model on crops from a new trap site.

The backbone trained on Meadow Transect is frozen; only the head learns.

    cd samples/pollinator_cnn && PYTHONPATH=.. python finetune.py --site hedgerow
"""

import argparse

import torch
import torch.nn.functional as F
from torch.utils.data import DataLoader
from torchvision import transforms

from pollinator_cnn.data import CROP_MEAN, CROP_STD, IMAGE_SIZE, crop_folder
from pollinator_cnn.models import PollinatorNetMS

train_tf = transforms.Compose([
    transforms.RandomResizedCrop(IMAGE_SIZE, scale=(0.7, 1.0)),
    transforms.RandomHorizontalFlip(),
    transforms.ToTensor(),
    transforms.Normalize(CROP_MEAN, CROP_STD),
])

val_tf = transforms.Compose([
    transforms.Resize(72),
    transforms.CenterCrop(IMAGE_SIZE),
    transforms.ToTensor(),
])


def parse_args():
    parser = argparse.ArgumentParser(description="Fine-tune on a new trap site")
    parser.add_argument("--site", default="hedgerow")
    parser.add_argument("--weights", default="checkpoints/pollinator_net.pt")
    parser.add_argument("--batch-size", type=int, default=32)
    parser.add_argument("--epochs", type=int, default=10)
    parser.add_argument("--lr", type=float, default=3e-4)
    return parser.parse_args()


def param_groups(model, weight_decay):
    """No decay on biases and norm scales/shifts."""
    decay, no_decay = [], []
    for name, p in model.named_parameters():
        if not p.requires_grad:
            continue
        if p.ndim <= 1 or name.endswith(".bias"):
            no_decay.append(p)
        else:
            decay.append(p)
    return [
        {"params": decay, "weight_decay": weight_decay},
        {"params": no_decay, "weight_decay": 0.0},
    ]


def predict_crops(model, loader, device):
    scores = []
    with torch.no_grad():
        for images, _ in loader:
            scores.append(F.softmax(model(images.to(device)), dim=1).cpu())
    return torch.cat(scores)


def main():
    args = parse_args()
    device = torch.device("cuda" if torch.cuda.is_available() else "cpu")
    root = f"data/{args.site}"
    train_set = crop_folder(root, "train", train_tf)
    val_set = crop_folder(root, "val", val_tf)
    train_loader = DataLoader(train_set, batch_size=args.batch_size, shuffle=True, drop_last=True)
    val_loader = DataLoader(val_set, batch_size=128)
    targets = torch.tensor(val_set.targets)

    model = PollinatorNetMS()
    state = torch.load(args.weights, map_location="cpu")
    backbone_state = {k[len("backbone."):]: v for k, v in state.items() if k.startswith("backbone.")}
    model.backbone.load_state_dict(backbone_state)
    model.backbone.requires_grad_(False)
    model.to(device)

    optimizer = torch.optim.AdamW(param_groups(model, 0.05), lr=args.lr)

    for epoch in range(args.epochs):
        model.train()
        for images, labels in train_loader:
            images, labels = images.to(device), labels.to(device)
            optimizer.zero_grad()
            loss = F.cross_entropy(model(images), labels)
            loss.backward()
            optimizer.step()

        model.eval()
        scores = predict_crops(model, val_loader, device)
        acc = (scores.argmax(dim=1) == targets).float().mean().item()
        print(f"[{args.site}] epoch {epoch}  val acc {acc:.3f}")

    torch.save(model.state_dict(), f"checkpoints/pollinator_ms_{args.site}.pt")


if __name__ == "__main__":
    main()
