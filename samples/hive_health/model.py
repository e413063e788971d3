"""Self-normalising MLPs that screen colonies from inspection + sensor features.

Input: 8 sensor summaries (weight trend, brood temperature spread, humidity,
acoustic band energies, ...) followed by 4 inspection scores (brood pattern,
stores, temper, mite count). Output: healthy / queenless / varroa-stressed.
"""

import torch
import torch.nn.functional as F
from torch import nn

N_SENSOR = 8
N_INSPECTION = 4
N_FEATURES = N_SENSOR + N_INSPECTION
N_CLASSES = 3
EXAMPLE_INPUT_SHAPE = (4, N_FEATURES)


def lecun_normal_(module):
    """LeCun normal init (std = 1/sqrt(fan_in)), what SELU networks expect."""
    if isinstance(module, nn.Linear):
        nn.init.kaiming_normal_(module.weight, mode="fan_in", nonlinearity="linear")
        if module.bias is not None:
            nn.init.zeros_(module.bias)


def selu_block(d_in, d_out, rate):
    return nn.Sequential(nn.Linear(d_in, d_out), nn.SELU(), nn.AlphaDropout(rate))


class HiveHealthMLP(nn.Module):
    """The screening model: SELU + AlphaDropout throughout."""

    def __init__(self, n_features=N_FEATURES, hidden=(128, 128, 64), rate=0.05, n_classes=N_CLASSES):
        super().__init__()
        self.blocks = nn.ModuleList()
        d_in = n_features
        for d_out in hidden:
            self.blocks.append(selu_block(d_in, d_out, rate))
            d_in = d_out
        self.out = nn.Linear(d_in, n_classes)
        self.apply(lecun_normal_)

    def forward(self, x):
        x = F.alpha_dropout(x, p=0.02, training=self.training)
        for blk in self.blocks:
            x = blk(x)
        return self.out(x)


class BaselineSELUNet(nn.Module):
    """First version from the pilot season, kept as a baseline."""

    def __init__(self, n_features=N_FEATURES, n_classes=N_CLASSES):
        super().__init__()
        self.net = nn.Sequential(
            nn.Linear(n_features, 128),
            nn.SELU(),
            nn.Dropout(0.2),
            nn.Linear(128, 64),
            nn.SELU(),
            nn.Linear(64, n_classes),
        )
        for m in self.modules():
            if isinstance(m, nn.Linear):
                nn.init.kaiming_normal_(m.weight, nonlinearity="relu")
                nn.init.zeros_(m.bias)

    def forward(self, x):
        return self.net(x)


class NormedSELUNet(nn.Module):
    """Variant with an input BatchNorm, tried when the mite counts were unscaled."""

    def __init__(self, n_features=N_FEATURES, n_classes=N_CLASSES):
        super().__init__()
        self.fc1 = nn.Linear(n_features, 96, bias=False)
        self.bn1 = nn.BatchNorm1d(96)
        self.fc2 = nn.Linear(96, 48)
        self.drop = nn.AlphaDropout(0.05)
        self.fc3 = nn.Linear(48, n_classes)
        self.apply(lecun_normal_)

    def forward(self, x):
        x = F.selu(self.bn1(self.fc1(x)))
        x = F.selu(self.fc2(x))
        return self.fc3(self.drop(x))


class WideReLUNet(nn.Module):
    """ReLU comparison model for the methods section."""

    def __init__(self, n_features=N_FEATURES, width=256, n_classes=N_CLASSES):
        super().__init__()
        self.fc = nn.Linear(n_features, width)
        self.norm = nn.LayerNorm(width)
        self.drop = nn.AlphaDropout(0.1)
        self.out = nn.Linear(width, n_classes)

    def forward(self, x):
        x = F.relu(self.norm(self.fc(x)))
        return self.out(self.drop(x))


class TwoTowerSELU(nn.Module):
    """Separate towers for sensor and inspection features, joined before the output."""

    def __init__(self, n_classes=N_CLASSES):
        super().__init__()
        self.sensor = nn.Sequential(nn.Linear(N_SENSOR, 64), nn.SELU(), nn.Linear(64, 32), nn.SELU())
        self.inspection = nn.Sequential(nn.Linear(N_INSPECTION, 16), nn.SELU())
        self.out = nn.Linear(48, n_classes)
        self.apply(lecun_normal_)

    def forward(self, x):
        s = self.sensor(x[:, :N_SENSOR])
        i = self.inspection(x[:, N_SENSOR:])
        h = torch.cat([s, i], dim=1)
        h = F.alpha_dropout(h, p=0.1)
        return self.out(h)


class LinearProbe(nn.Module):
    """Multinomial logistic regression in torch, the sanity-check baseline."""

    def __init__(self, n_features=N_FEATURES, n_classes=N_CLASSES):
        super().__init__()
        self.linear = nn.Linear(n_features, n_classes)

    def forward(self, x):
        return self.linear(x)
