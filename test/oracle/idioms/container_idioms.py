"""Container idioms of torchvision-style models, small enough to run: the oracle's named_modules() and forward hooks
say what PyTorch names and feeds, and test/oracle/model-graph-idioms.test.ts compares that with `regwise model`."""
from collections import OrderedDict

import torch
import torch.nn as nn
import torch.nn.functional as F

EXAMPLE_INPUT_SHAPE = (2, 3, 32, 32)

CFG = [8, "M", 16, 16, "M"]


def make_layers(cfg, batch_norm=False):
    layers = []
    in_channels = 3
    for v in cfg:
        if v == "M":
            layers += [nn.MaxPool2d(kernel_size=2, stride=2)]
        else:
            conv2d = nn.Conv2d(in_channels, v, kernel_size=3, padding=1, bias=not batch_norm)
            if batch_norm:
                layers += [conv2d, nn.BatchNorm2d(v), nn.ReLU(inplace=True)]
            else:
                layers += [conv2d, nn.ReLU(inplace=True)]
            in_channels = v
    return nn.Sequential(*layers)


class VGGPlain(nn.Module):
    def __init__(self):
        super().__init__()
        self.features = make_layers(CFG)
        self.classifier = nn.Sequential(nn.Flatten(), nn.Dropout(0.5), nn.Linear(16 * 8 * 8, 10))

    def forward(self, x):
        return self.classifier(self.features(x))


class VGGBN(nn.Module):
    def __init__(self):
        super().__init__()
        self.features = make_layers(CFG, batch_norm=True)

    def forward(self, x):
        return self.features(x)


class ConvBNReLU(nn.Sequential):
    def __init__(self, i, o, stride=1, groups=1, norm_layer=None):
        if norm_layer is None:
            norm_layer = nn.BatchNorm2d
        super().__init__(nn.Conv2d(i, o, 3, stride, 1, groups=groups, bias=False), norm_layer(o), nn.ReLU6(inplace=True))


class InvertedResidual(nn.Module):
    def __init__(self, i, o, stride, expand):
        super().__init__()
        hidden = i * expand
        self.use_res = stride == 1 and i == o
        layers = []
        if expand != 1:
            layers.append(ConvBNReLU(i, hidden))
        layers.extend([ConvBNReLU(hidden, hidden, stride=stride, groups=hidden), nn.Conv2d(hidden, o, 1, bias=False), nn.BatchNorm2d(o)])
        self.conv = nn.Sequential(*layers)

    def forward(self, x):
        if self.use_res:
            return x + self.conv(x)
        return self.conv(x)


class MobileNetish(nn.Module):
    def __init__(self):
        super().__init__()
        input_channel = 8
        features = [ConvBNReLU(3, input_channel, stride=2)]
        for t, c, n, s in [[1, 8, 1, 1], [4, 16, 2, 2]]:
            for k in range(n):
                features.append(InvertedResidual(input_channel, c, s if k == 0 else 1, t))
                input_channel = c
        self.features = nn.Sequential(*features)
        self.head = features[0][0]

    def forward(self, x):
        return self.features(x)


class DenseLayer(nn.Module):
    def __init__(self, i, g):
        super().__init__()
        self.norm1 = nn.BatchNorm2d(i)
        self.relu1 = nn.ReLU(inplace=True)
        self.conv1 = nn.Conv2d(i, g, 3, padding=1, bias=False)

    def forward(self, feats):
        return self.conv1(self.relu1(self.norm1(torch.cat(feats, 1))))


class DenseBlock(nn.ModuleDict):
    def __init__(self, n, i, g):
        super().__init__()
        for k in range(n):
            self.add_module("denselayer%d" % (k + 1), DenseLayer(i + k * g, g))

    def forward(self, x):
        feats = [x]
        for name, layer in self.items():
            feats.append(layer(feats))
        return torch.cat(feats, 1)


class Transition(nn.Sequential):
    def __init__(self, i, o):
        super().__init__()
        self.norm = nn.BatchNorm2d(i)
        self.relu = nn.ReLU(inplace=True)
        self.conv = nn.Conv2d(i, o, 1, bias=False)
        self.pool = nn.AvgPool2d(2, 2)


class DenseNetish(nn.Module):
    def __init__(self, growth=4, cfg=(2, 2), init=8):
        super().__init__()
        self.features = nn.Sequential(OrderedDict([("conv0", nn.Conv2d(3, init, 3, padding=1, bias=False)), ("norm0", nn.BatchNorm2d(init)), ("relu0", nn.ReLU(inplace=True))]))
        c = init
        for i, n in enumerate(cfg):
            self.features.add_module("denseblock%d" % (i + 1), DenseBlock(n, c, growth))
            c = c + n * growth
            if i != len(cfg) - 1:
                self.features.add_module(f"transition{i + 1}", Transition(c, c // 2))
                c = c // 2
        self.features.add_module("norm5", nn.BatchNorm2d(c))
        self.classifier = nn.Linear(c, 10)

    def forward(self, x):
        out = F.relu(self.features(x))
        return self.classifier(torch.flatten(F.adaptive_avg_pool2d(out, 1), 1))


class Block(nn.Module):
    def __init__(self, c, norm_layer=None):
        super().__init__()
        norm_layer = norm_layer or nn.BatchNorm2d
        self.conv = nn.Conv2d(c, c, 3, padding=1, bias=False)
        self.bn = norm_layer(c)

    def forward(self, x):
        return F.relu(self.bn(self.conv(x)) + x)


class LambdaNorm(nn.Module):
    def __init__(self):
        super().__init__()
        self.stem = nn.Conv2d(3, 32, 3, padding=1, bias=False)
        self.blocks = nn.Sequential(*[Block(32, norm_layer=lambda ch: nn.GroupNorm(8, ch)) for _ in range(2)])

    def forward(self, x):
        return self.blocks(self.stem(x))


class Stack(nn.ModuleList):
    def __init__(self, n):
        super().__init__([nn.Conv2d(3, 3, 1) for _ in range(n)])


class ListSubclass(nn.Module):
    def __init__(self):
        super().__init__()
        self.stack = Stack(3)
        self.bn = nn.BatchNorm2d(3)

    def forward(self, x):
        for layer in self.stack:
            x = layer(x)
        return self.bn(x)


class SharedOutput(nn.Module):
    def __init__(self):
        super().__init__()
        self.lateral = nn.Conv2d(3, 8, 1)
        self.bn = nn.BatchNorm2d(8)

    def forward(self, x):
        lat = self.lateral(x)
        return self.bn(lat), lat


class OldStyleInit(nn.Sequential):
    """The base constructor called by name, as code written before super() without arguments does."""

    def __init__(self):
        nn.Sequential.__init__(self, nn.Conv2d(3, 8, 3, padding=1, bias=False), nn.BatchNorm2d(8), nn.ReLU())


class SetattrNames(nn.Module):
    def __init__(self, n=2):
        super().__init__()
        self.n = n
        for i in range(n):
            setattr(self, f"conv{i}", nn.Conv2d(3, 3, 1, bias=False))
            setattr(self, "bn%d" % i, nn.BatchNorm2d(3))

    def forward(self, x):
        for i in range(self.n):
            x = getattr(self, "bn%d" % i)(getattr(self, f"conv{i}")(x))
        return x
