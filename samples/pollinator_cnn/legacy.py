"""PyTorch port of last season's Keras prototype ("trapnet-v1").

Kept so that the new model can be compared with the 2023 field report.
Layer sizes and hyper-parameters were copied over from the Keras code.
"""

import torch
from torch import nn

from . import NUM_CLASSES

EXAMPLE_INPUT_SHAPE = (2, 3, 64, 64)
KERAS_WIDTHS = (24, 48, 96)


def keras_conv_block(c_in, c_out):
    """Conv2D -> BatchNormalization -> ReLU -> MaxPooling2D, as in the Keras model."""
    return nn.Sequential(
        nn.Conv2d(c_in, c_out, kernel_size=3, padding=1),
        nn.BatchNorm2d(c_out, momentum=0.99, eps=1e-3),
        nn.ReLU(),
        nn.MaxPool2d(2),
    )


class SpatialDropBlock(nn.Module):
    """Drops whole feature maps, standing in for Keras SpatialDropout2D."""

    example_input_shape = (2, 96, 8, 8)

    def __init__(self, rate=0.1):
        super().__init__()
        self.rate = rate

    def forward(self, x):
        mask = (torch.rand(x.shape[0], x.shape[1], 1, 1, device=x.device) > self.rate).float()
        return x * mask


class LegacyTrapNet(nn.Module):
    def __init__(self, num_classes=NUM_CLASSES):
        super().__init__()
        chans = (3,) + KERAS_WIDTHS
        self.blocks = nn.ModuleList([keras_conv_block(chans[i], chans[i + 1]) for i in range(len(KERAS_WIDTHS))])
        self.spatial_drop = SpatialDropBlock(0.1)
        self.head = nn.Sequential()
        self.head.add_module("pool", nn.AdaptiveAvgPool2d(1))
        self.head.add_module("flatten", nn.Flatten())
        self.head.add_module("fc", nn.Linear(KERAS_WIDTHS[-1], num_classes))

    def forward(self, x):
        for blk in self.blocks:
            x = blk(x)
        x = self.spatial_drop(x)
        return self.head(x)
