"""Head variants sketched during the spring sprint. Not imported anywhere.

These drafts do not run: they were parked here when the sprint ended and
are kept only for the record (see samples/EXPECTED.md).
"""

import torch.nn as nn
import torch.nn.functional as F

from . import NUM_CLASSES

EXAMPLE_INPUT_SHAPE = (2, 128, 8, 8)


class WideHeadDraft(nn.Module):
    """Reduce to 96 channels before pooling."""

    def __init__(self, num_classes=NUM_CLASSES):
        super().__init__()
        self.reduce = nn.Conv2d(128, 96, kernel_size=3, padding=1, bias=False)
        self.bn = nn.BatchNorm2d(128)
        self.pool = nn.AdaptiveAvgPool2d(1)
        self.fc = nn.Linear(96, num_classes)

    def forward(self, x):
        x = F.relu(self.bn(self.reduce(x)))
        return self.fc(self.pool(x).flatten(1))


class GroupNormHeadDraft(nn.Module):
    """Batch-size-free head for the single-crop field tablet."""

    def __init__(self, num_classes=NUM_CLASSES):
        super().__init__()
        self.proj = nn.Conv2d(128, 48, kernel_size=1, bias=False)
        self.gn = nn.GroupNorm(32, 48)
        self.pool = nn.AdaptiveAvgPool2d(1)
        self.fc = nn.Linear(48, num_classes)

    def forward(self, x):
        x = F.relu(self.gn(self.proj(x)))
        return self.fc(self.pool(x).flatten(1))


class FlatHeadDraft(nn.Module):
    """Pool first, then a two-layer MLP."""

    def __init__(self, num_classes=NUM_CLASSES):
        super().__init__()
        self.pool = nn.AdaptiveAvgPool2d(1)
        self.fc1 = nn.Linear(128, 64, bias=False)
        self.norm = nn.BatchNorm2d(64)
        self.fc2 = nn.Linear(64, num_classes)

    def forward(self, x):
        x = self.pool(x).flatten(1)
        x = F.relu(self.norm(self.fc1(x)))
        return self.fc2(x)
