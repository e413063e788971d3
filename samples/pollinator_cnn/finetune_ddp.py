"""Fine-tune the last stage and the head on all four GPUs.

The stem and the first two stages stay frozen and their BatchNorm layers stay
in inference mode, so their running statistics keep the pretrained values.

    torchrun --nproc_per_node=4 finetune_ddp.py
"""

import argparse
import os

import torch
import torch.distributed as dist
import torch.nn as nn
import torch.nn.functional as F
from torch.nn.parallel import DistributedDataParallel as DDP
from torch.utils.data import DataLoader
from torch.utils.data.distributed import DistributedSampler

from pollinator_cnn.data import crop_folder, train_transform
from pollinator_cnn.models import PollinatorNet


def parse_args():
    parser = argparse.ArgumentParser()
    parser.add_argument("--root", default="data/crops_2024")
    parser.add_argument("--weights", default="checkpoints/pollinator_net.pt")
    parser.add_argument("--batch-per-gpu", type=int, default=16)
    parser.add_argument("--epochs", type=int, default=8)
    return parser.parse_args()


def main():
    args = parse_args()
    dist.init_process_group("nccl")
    rank = int(os.environ["LOCAL_RANK"])
    torch.cuda.set_device(rank)
    device = torch.device("cuda", rank)

    train_set = crop_folder(args.root, "train", train_transform)
    sampler = DistributedSampler(train_set, shuffle=True)
    loader = DataLoader(train_set, batch_size=args.batch_per_gpu, sampler=sampler, num_workers=4)

    net = PollinatorNet()
    net.load_state_dict(torch.load(args.weights, map_location="cpu"))
    frozen = [net.backbone.stem, net.backbone.layer1, net.backbone.layer2]
    for part in frozen:
        part.requires_grad_(False)

    net = nn.SyncBatchNorm.convert_sync_batchnorm(net)
    model = DDP(net.to(device), device_ids=[rank])
    optimizer = torch.optim.SGD([p for p in model.parameters() if p.requires_grad], lr=0.005, momentum=0.9)

    for epoch in range(args.epochs):
        sampler.set_epoch(epoch)
        model.train()
        net.backbone.stem.eval()
        net.backbone.layer1.eval()
        net.backbone.layer2.eval()
        for images, labels in loader:
            images, labels = images.to(device), labels.to(device)
            optimizer.zero_grad()
            F.cross_entropy(model(images), labels).backward()
            optimizer.step()

    if rank == 0:
        torch.save(model.module.state_dict(), "checkpoints/pollinator_net_2024.pt")
    dist.destroy_process_group()


if __name__ == "__main__":
    main()
