"""Dropout-rate sweep from the lab notebook, rates typed in as percentages.

Not imported anywhere: constructing this model fails (see samples/EXPECTED.md).
"""

from torch import nn

from model import N_CLASSES, N_FEATURES, lecun_normal_

EXAMPLE_INPUT_SHAPE = (4, N_FEATURES)


class SweepSELUNet(nn.Module):
    def __init__(self, n_features=N_FEATURES, n_classes=N_CLASSES):
        super().__init__()
        self.net = nn.Sequential(
            nn.Linear(n_features, 128),
            nn.SELU(),
            nn.AlphaDropout(5),
            nn.Linear(128, n_classes),
        )
        self.apply(lecun_normal_)

    def forward(self, x):
        return self.net(x)
