"""Classifier heads that sit on top of the pollinator backbone."""

import torch
from torch import nn
from torch.nn import BatchNorm2d as BN
import torch.nn.functional as F

from . import NUM_CLASSES


class ContextBranch(nn.Module):
    """Dilated 3x3 branch that looks at the flower around the insect."""

    example_input_shape = (2, 128, 8, 8)

    def __init__(self, in_ch=128, out_ch=64, dilation=2):
        super().__init__()
        self.conv = nn.Conv2d(in_ch, out_ch, kernel_size=3, padding=dilation, dilation=dilation)
        self.gn = nn.GroupNorm(8, out_ch)

    def forward(self, x):
        return F.relu(self.gn(self.conv(x)))


class MultiScaleHead(nn.Module):
    """Fuses a 1x1 'local' view with the dilated context branch."""

    example_input_shape = (2, 128, 8, 8)

    def __init__(self, in_ch=128, num_classes=NUM_CLASSES):
        super().__init__()
        self.local = nn.Sequential(
            nn.Conv2d(in_ch, 64, kernel_size=1, bias=False),
            BN(64),
            nn.ReLU(inplace=True),
        )
        self.context = ContextBranch(in_ch, 64)
        self.fuse = nn.Sequential(
            nn.Dropout2d(0.1),
            BN(128),
            nn.ReLU(inplace=True),
        )
        self.pool = nn.AdaptiveAvgPool2d(1)
        self.fc = nn.Linear(128, num_classes)

    def forward(self, x):
        x = torch.cat([self.local(x), self.context(x)], dim=1)
        x = self.fuse(x)
        x = torch.flatten(self.pool(x), 1)
        x = F.dropout(x, p=0.2)
        return self.fc(x)
