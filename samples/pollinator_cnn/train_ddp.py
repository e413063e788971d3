"""Re-run the Keras-port baseline on the 4-GPU workstation, one process per GPU.

    torchrun --nproc_per_node=4 train_ddp.py
"""

import argparse
import os

import torch
import torch.distributed as dist
import torch.nn.functional as F
from torch.nn.parallel import DistributedDataParallel
from torch.utils.data import DataLoader
from torch.utils.data.distributed import DistributedSampler
from torchvision import transforms

from pollinator_cnn.data import CROP_MEAN, CROP_STD, crop_folder
from pollinator_cnn.legacy import LegacyTrapNet

keras_train_tf = transforms.Compose([
    transforms.RandomResizedCrop(64, scale=(0.8, 1.0)),
    transforms.RandomHorizontalFlip(),
    transforms.ToTensor(),
    transforms.Normalize(CROP_MEAN, CROP_STD),
])

keras_val_tf = transforms.Compose([
    transforms.Resize(64),
    transforms.RandomHorizontalFlip(),
    transforms.ToTensor(),
    transforms.Normalize(CROP_MEAN, CROP_STD),
])


def parse_args():
    parser = argparse.ArgumentParser()
    parser.add_argument("--root", default="data/crops")
    parser.add_argument("--batch-per-gpu", type=int, default=8)
    parser.add_argument("--epochs", type=int, default=40)
    parser.add_argument("--lr", type=float, default=0.02)
    return parser.parse_args()


def evaluate(model, loader, device):
    model.eval()
    correct = torch.zeros((), device=device)
    count = torch.zeros((), device=device)
    with torch.no_grad():
        for images, labels in loader:
            images, labels = images.to(device), labels.to(device)
            correct += (model(images).argmax(dim=1) == labels).sum()
            count += labels.numel()
    dist.all_reduce(correct)
    dist.all_reduce(count)
    return (correct / count).item()


def main():
    args = parse_args()
    dist.init_process_group("nccl")
    rank = int(os.environ["LOCAL_RANK"])
    torch.cuda.set_device(rank)
    device = torch.device("cuda", rank)

    train_set = crop_folder(args.root, "train", keras_train_tf)
    val_set = crop_folder(args.root, "val", keras_val_tf)
    sampler = DistributedSampler(train_set, shuffle=True)
    train_loader = DataLoader(train_set, batch_size=args.batch_per_gpu, sampler=sampler, num_workers=4)
    val_loader = DataLoader(val_set, batch_size=64, sampler=DistributedSampler(val_set, shuffle=False))

    model = LegacyTrapNet().to(device)
    model = DistributedDataParallel(model, device_ids=[rank])
    optimizer = torch.optim.SGD(model.parameters(), lr=args.lr, momentum=0.9)

    for epoch in range(args.epochs):
        sampler.set_epoch(epoch)
        model.train()
        for images, labels in train_loader:
            images, labels = images.to(device), labels.to(device)
            optimizer.zero_grad()
            F.cross_entropy(model(images), labels).backward()
            optimizer.step()
        acc = evaluate(model, val_loader, device)
        if rank == 0:
            print(f"epoch {epoch}  val acc {acc:.3f}")

    dist.destroy_process_group()


if __name__ == "__main__":
    main()
