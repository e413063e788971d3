"""Residual CNN for 64x64 pollinator crops.

The blocks follow the familiar torchvision layout (``norm_layer`` argument,
``conv3x3`` helper, ``_make_layer``) so weights and habits carry over.
"""

import functools
from collections import OrderedDict

import torch
import torch.nn as nn
import torch.nn.functional as F

from . import NUM_CLASSES
from .heads import MultiScaleHead

EXAMPLE_INPUT_SHAPE = (2, 3, 64, 64)
STAGE_WIDTHS = (32, 64, 128)
BN_MOMENTUM = 0.05


def conv3x3(in_planes, out_planes, stride=1):
    """3x3 convolution with padding; the norm that follows makes a bias redundant."""
    return nn.Conv2d(in_planes, out_planes, kernel_size=3, stride=stride, padding=1, bias=False)


def conv1x1(in_planes, out_planes, stride=1):
    return nn.Conv2d(in_planes, out_planes, kernel_size=1, stride=stride, bias=False)


class Stem(nn.Module):
    """5x5 stride-2 entry convolution: 64x64 crops -> 32x32 maps."""

    def __init__(self, in_ch=3, out_ch=32):
        super().__init__()
        self.conv = nn.Conv2d(in_ch, out_ch, kernel_size=5, stride=2, padding=2)
        self.bn = nn.BatchNorm2d(out_ch)

    def forward(self, x):
        return F.relu(self.bn(self.conv(x)))


class BasicBlock(nn.Module):
    expansion = 1
    example_input_shape = (2, 32, 16, 16)

    def __init__(self, inplanes=32, planes=32, stride=1, downsample=None, norm_layer=None, drop_path=0.0):
        super().__init__()
        if norm_layer is None:
            norm_layer = nn.BatchNorm2d
        self.conv1 = conv3x3(inplanes, planes, stride)
        self.bn1 = norm_layer(planes)
        self.relu = nn.ReLU(inplace=True)
        self.conv2 = conv3x3(planes, planes)
        self.bn2 = norm_layer(planes)
        self.downsample = downsample
        self.stride = stride
        self.drop_path = drop_path

    def forward(self, x):
        identity = x

        out = self.conv1(x)
        out = self.bn1(out)
        out = self.relu(out)

        out = self.conv2(out)
        out = self.bn2(out)

        if self.training and self.drop_path > 0.0:
            keep = 1.0 - self.drop_path
            mask = torch.bernoulli(torch.full((out.shape[0], 1, 1, 1), keep, device=out.device))
            out = out * mask / keep

        if self.downsample is not None:
            identity = self.downsample(x)

        out += identity
        out = self.relu(out)
        return out


class PollinatorBackbone(nn.Module):
    """Stem plus three residual stages; returns a 128-channel 8x8 map."""

    def __init__(self, widths=STAGE_WIDTHS, blocks_per_stage=2, norm_layer=None):
        super().__init__()
        if norm_layer is None:
            norm_layer = functools.partial(nn.BatchNorm2d, momentum=BN_MOMENTUM)
        self._norm_layer = norm_layer
        self.inplanes = 32
        self.stem = Stem(3, self.inplanes)
        self.layer1 = self._make_layer(widths[0], blocks_per_stage)
        self.layer2 = self._make_layer(widths[1], blocks_per_stage, stride=2)
        self.layer3 = self._make_layer(widths[2], blocks_per_stage, stride=2, drop_path=0.1)

    def _make_layer(self, planes, blocks, stride=1, drop_path=0.0):
        norm_layer = self._norm_layer
        downsample = None
        if stride != 1 or self.inplanes != planes:
            downsample = nn.Sequential(
                conv1x1(self.inplanes, planes, stride),
                norm_layer(planes),
            )

        layers = []
        layers.append(BasicBlock(self.inplanes, planes, stride, downsample, norm_layer, drop_path))
        self.inplanes = planes
        for _ in range(1, blocks):
            layers.append(BasicBlock(self.inplanes, planes, norm_layer=norm_layer, drop_path=drop_path))
        return nn.Sequential(*layers)

    def forward(self, x):
        x = self.stem(x)
        x = self.layer1(x)
        x = self.layer2(x)
        x = self.layer3(x)
        return x


class PollinatorNet(nn.Module):
    """Backbone + pooled linear classifier (the model in the field report)."""

    def __init__(self, num_classes=NUM_CLASSES, widths=STAGE_WIDTHS):
        super().__init__()
        self.backbone = PollinatorBackbone(widths)
        self.classifier = nn.Sequential(OrderedDict([
            ("pool", nn.AdaptiveAvgPool2d(1)),
            ("flatten", nn.Flatten()),
            ("dropout", nn.Dropout(0.3)),
            ("fc", nn.Linear(widths[-1], num_classes)),
        ]))

    def forward(self, x):
        return self.classifier(self.backbone(x))


class PollinatorNetMS(nn.Module):
    """Same backbone with the multi-scale head, used when fine-tuning on a new site."""

    def __init__(self, num_classes=NUM_CLASSES):
        super().__init__()
        self.backbone = PollinatorBackbone()
        self.head = MultiScaleHead(STAGE_WIDTHS[-1], num_classes)

    def forward(self, x):
        feats = self.backbone(x)
        return self.head(feats)
