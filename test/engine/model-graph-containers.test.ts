// Fixture tests for container idioms of torchvision-style models: layer names as named_modules() gives them (checked
// against PyTorch 1.13 by running the same classes) and feeds that never jump over a registration the engine lost.
import { describe, expect, test } from 'vitest';
import { Views } from '../../server/src/engine/views';
import { show } from '../../server/src/engine/values';
import { engineFor } from '../helpers/rule-tester';

async function graph(code: string, cls: string) {
  const e = await engineFor([], { 'main.py': code });
  const g = new Views(e.ws).models.graphsIn('main.py').find((x) => x.className === cls);
  if (!g) throw new Error(`no graph for ${cls}`);
  return {
    layers: g.layers.map((l) => `${l.name} ${l.type.replace('torch.nn.', '')}`),
    flow: g.flow.map(([a, b]) => `${a.name}>${b.name}`),
    arg: (layer: string, name: string) => show(g.layers.find((l) => l.name === layer)?.inst.args.get(name)),
  };
}

const H = ['import torch', 'import torch.nn as nn', 'import torch.nn.functional as F'];

describe('cfg lists', () => {
  // torchvision's VGG: ints are conv widths, "M" marks a pool; `v == "M"` on an int is False, not unknown
  const vgg = (bn: string) => [
    ...H,
    'cfg = [8, "M", 16, "M"]',
    'def make_layers(cfg, batch_norm=False):',
    '    layers = []',
    '    in_channels = 3',
    '    for v in cfg:',
    '        if v == "M":',
    '            layers += [nn.MaxPool2d(2, 2)]',
    '        else:',
    '            conv2d = nn.Conv2d(in_channels, v, kernel_size=3, padding=1, bias=not batch_norm)',
    '            if batch_norm:',
    '                layers += [conv2d, nn.BatchNorm2d(v), nn.ReLU(inplace=True)]',
    '            else:',
    '                layers += [conv2d, nn.ReLU(inplace=True)]',
    '            in_channels = v',
    '    return nn.Sequential(*layers)',
    'class VGG(nn.Module):',
    '    def __init__(self):',
    '        super().__init__()',
    `        self.features = make_layers(cfg, batch_norm=${bn})`,
    '    def forward(self, x):',
    '        return self.features(x)',
  ].join('\n');

  test('with BatchNorm', async () => {
    const { layers, flow, arg } = await graph(vgg('True'), 'VGG');
    expect(layers).toEqual([
      'features.0 Conv2d', 'features.1 BatchNorm2d', 'features.2 ReLU', 'features.3 MaxPool2d',
      'features.4 Conv2d', 'features.5 BatchNorm2d', 'features.6 ReLU', 'features.7 MaxPool2d',
    ]);
    expect(flow).toEqual(['features.0>features.1', 'features.1>features.2', 'features.2>features.3', 'features.3>features.4', 'features.4>features.5', 'features.5>features.6', 'features.6>features.7']);
    expect(arg('features.0', 'bias')).toBe(false);
  });

  test('without BatchNorm', async () => {
    const { layers, arg } = await graph(vgg('False'), 'VGG');
    expect(layers).toEqual(['features.0 Conv2d', 'features.1 ReLU', 'features.2 MaxPool2d', 'features.3 Conv2d', 'features.4 ReLU', 'features.5 MaxPool2d']);
    expect(arg('features.0', 'bias')).toBe(true);
  });
});

describe('names built from strings', () => {
  const dense = (name: string) => [
    ...H,
    'class Net(nn.Module):',
    '    def __init__(self):',
    '        super().__init__()',
    '        self.features = nn.Sequential(nn.Conv2d(3, 8, 3, bias=False), nn.BatchNorm2d(8))',
    '        for i in range(2):',
    `            self.features.add_module(${name}, nn.Conv2d(8, 8, 3, bias=False))`,
    '        self.features.add_module("norm5", nn.BatchNorm2d(8))',
    '    def forward(self, x):',
    '        return self.features(x)',
  ].join('\n');

  test('"block%d" % (i + 1)', async () => {
    const { layers, flow } = await graph(dense('"block%d" % (i + 1)'), 'Net');
    expect(layers).toEqual(['features.0 Conv2d', 'features.1 BatchNorm2d', 'features.block1 Conv2d', 'features.block2 Conv2d', 'features.norm5 BatchNorm2d']);
    expect(flow).toEqual(['features.0>features.1', 'features.1>features.block1', 'features.block1>features.block2', 'features.block2>features.norm5']);
  });

  test('f"block{i + 1}"', async () => {
    const { layers } = await graph(dense('f"block{i + 1}"'), 'Net');
    expect(layers).toEqual(['features.0 Conv2d', 'features.1 BatchNorm2d', 'features.block1 Conv2d', 'features.block2 Conv2d', 'features.norm5 BatchNorm2d']);
  });

  test('a name the engine cannot spell leaves a hole, and no feed is made up across it', async () => {
    // `{i:02d}` is a format spec the interpreter does not render: the two convs are not listed, so BN `features.1`
    // must not appear to feed `norm5` (it does not: the convs sit between them)
    const { layers, flow } = await graph(dense('f"block{i:02d}"'), 'Net');
    expect(layers).toEqual(['features.0 Conv2d', 'features.1 BatchNorm2d', 'features.norm5 BatchNorm2d']);
    expect(flow).toEqual([]);
  });

  test('a Sequential given something that is not a layer has a hole too', async () => {
    const { layers, flow } = await graph([...H, 'class Net(nn.Module):', '    def __init__(self):', '        super().__init__()',
      '        self.body = nn.Sequential(nn.Conv2d(3, 8, 3), *make_more(), nn.BatchNorm2d(8))', '    def forward(self, x):', '        return self.body(x)'].join('\n'), 'Net');
    expect(layers).toEqual(['body.0 Conv2d', 'body.2 BatchNorm2d']);
    expect(flow).toEqual([]);
  });
});

describe('subclasses of containers', () => {
  test('nn.Sequential subclass passing its layers to super().__init__ (MobileNetV2 ConvBNActivation)', async () => {
    const { layers, flow } = await graph([
      ...H,
      'class ConvBNReLU(nn.Sequential):',
      '    def __init__(self, i, o, stride=1, norm_layer=None):',
      '        if norm_layer is None:',
      '            norm_layer = nn.BatchNorm2d',
      '        super().__init__(nn.Conv2d(i, o, 3, stride, 1, bias=False), norm_layer(o), nn.ReLU6(inplace=True))',
      '        self.out_channels = o',
      'class Net(nn.Module):',
      '    def __init__(self):',
      '        super().__init__()',
      '        self.features = nn.Sequential(ConvBNReLU(3, 8, stride=2), ConvBNReLU(8, 16))',
      '    def forward(self, x):',
      '        return self.features(x)',
    ].join('\n'), 'Net');
    expect(layers).toEqual(['features.0.0 Conv2d', 'features.0.1 BatchNorm2d', 'features.0.2 ReLU6', 'features.1.0 Conv2d', 'features.1.1 BatchNorm2d', 'features.1.2 ReLU6']);
    expect(flow).toEqual(['features.0.0>features.0.1', 'features.0.1>features.0.2', 'features.0.2>features.1.0', 'features.1.0>features.1.1', 'features.1.1>features.1.2']);
  });

  test('nn.Sequential subclass with attribute layers runs them in order (DenseNet _Transition)', async () => {
    const { layers, flow } = await graph([
      ...H,
      'class Transition(nn.Sequential):',
      '    def __init__(self, i, o):',
      '        super().__init__()',
      '        self.norm = nn.BatchNorm2d(i)',
      '        self.relu = nn.ReLU(inplace=True)',
      '        self.conv = nn.Conv2d(i, o, kernel_size=1, bias=False)',
      'class Net(nn.Module):',
      '    def __init__(self):',
      '        super().__init__()',
      '        self.t = Transition(8, 4)',
      '        self.bn = nn.BatchNorm2d(4)',
      '    def forward(self, x):',
      '        return self.bn(self.t(x))',
    ].join('\n'), 'Net');
    expect(layers).toEqual(['t.norm BatchNorm2d', 't.relu ReLU', 't.conv Conv2d', 'bn BatchNorm2d']);
    expect(flow).toEqual(['t.norm>t.relu', 't.relu>t.conv', 't.conv>bn']);
  });

  test('nn.ModuleDict subclass filled with add_module and iterated with items() (DenseNet _DenseBlock)', async () => {
    const { layers, arg } = await graph([
      ...H,
      'class Layer(nn.Module):',
      '    def __init__(self, i, g):',
      '        super().__init__()',
      '        self.norm = nn.BatchNorm2d(i)',
      '        self.conv = nn.Conv2d(i, g, 3, padding=1, bias=False)',
      '    def forward(self, feats):',
      '        return self.conv(F.relu(self.norm(torch.cat(feats, 1))))',
      'class Block(nn.ModuleDict):',
      '    def __init__(self, n, i, g):',
      '        super().__init__()',
      '        for k in range(n):',
      '            self.add_module("denselayer%d" % (k + 1), Layer(i + k * g, g))',
      '    def forward(self, x):',
      '        feats = [x]',
      '        for name, layer in self.items():',
      '            feats.append(layer(feats))',
      '        return torch.cat(feats, 1)',
      'class Net(nn.Module):',
      '    def __init__(self):',
      '        super().__init__()',
      '        self.stem = nn.Conv2d(3, 8, 3, bias=False)',
      '        self.block = Block(2, 8, 4)',
      '        self.norm5 = nn.BatchNorm2d(16)',
      '    def forward(self, x):',
      '        return self.norm5(self.block(self.stem(x)))',
    ].join('\n'), 'Net');
    expect(layers).toEqual(['stem Conv2d', 'block.denselayer1.norm BatchNorm2d', 'block.denselayer1.conv Conv2d', 'block.denselayer2.norm BatchNorm2d', 'block.denselayer2.conv Conv2d', 'norm5 BatchNorm2d']);
    expect(arg('block.denselayer2.norm', 'num_features')).toBe(12);
  });

  test('nn.ModuleList subclass given a list', async () => {
    const { layers, flow } = await graph([
      ...H,
      'class Stack(nn.ModuleList):',
      '    def __init__(self, n):',
      '        super().__init__([nn.Linear(4, 4) for _ in range(n)])',
      'class Net(nn.Module):',
      '    def __init__(self):',
      '        super().__init__()',
      '        self.stack = Stack(2)',
      '    def forward(self, x):',
      '        for l in self.stack:',
      '            x = l(x)',
      '        return x',
    ].join('\n'), 'Net');
    expect(layers).toEqual(['stack.0 Linear', 'stack.1 Linear']);
    // iterating the subclass walks its layers as iterating nn.ModuleList does
    expect(flow).toEqual(['stack.0>stack.1']);
  });
});

describe('norm_layer as a lambda', () => {
  test('lambda c: nn.GroupNorm(32, c)', async () => {
    const { layers, arg } = await graph([
      ...H,
      'class Block(nn.Module):',
      '    def __init__(self, c, norm_layer=None):',
      '        super().__init__()',
      '        norm_layer = norm_layer or nn.BatchNorm2d',
      '        self.conv = nn.Conv2d(c, c, 3, bias=False)',
      '        self.bn = norm_layer(c)',
      'class Net(nn.Module):',
      '    def __init__(self):',
      '        super().__init__()',
      '        self.b = Block(64, norm_layer=lambda ch: nn.GroupNorm(32, ch))',
    ].join('\n'), 'Net');
    expect(layers).toEqual(['b.conv Conv2d', 'b.bn GroupNorm']);
    expect(arg('b.bn', 'num_channels')).toBe(64);
  });
});

describe('outputs used besides feeding a layer', () => {
  test('returned, added, passed to a library call; a shape query does not count', async () => {
    const e = await engineFor([], {
      'main.py': [
        ...H,
        'class M(nn.Module):',
        '    def __init__(self):',
        '        super().__init__()',
        '        self.a = nn.Conv2d(3, 8, 1)',
        '        self.b = nn.Conv2d(3, 8, 1)',
        '        self.c = nn.Conv2d(3, 8, 1)',
        '        self.d = nn.Conv2d(3, 8, 1)',
        '        self.bn = nn.BatchNorm2d(8)',
        '    def forward(self, x):',
        '        a = self.a(x)',
        '        b = self.b(x)',
        '        c = self.c(x)',
        '        d = self.d(x)',
        '        n = d.size(0)',
        '        return self.bn(a) + self.bn(b) + self.bn(c) + self.bn(d), a, b + 1, torch.sigmoid(c)',
      ].join('\n'),
    });
    const g = new Views(e.ws).models.graphsIn('main.py').find((x) => x.className === 'M')!;
    expect([...g.sharedOutputs].map((l) => l.name).sort()).toEqual(['a', 'b', 'bn', 'c']);
  });
});

describe('base constructor called by name', () => {
  test('nn.Sequential.__init__(self, *layers) registers and chains the layers', async () => {
    const { layers, flow } = await graph([
      ...H,
      'class ConvBN(nn.Sequential):',
      '    def __init__(self):',
      '        nn.Sequential.__init__(self, nn.Conv2d(3, 8, 3, bias=False), nn.BatchNorm2d(8))',
    ].join('\n'), 'ConvBN');
    expect(layers).toEqual(['0 Conv2d', '1 BatchNorm2d']);
    expect(flow).toEqual(['0>1']);
  });
});
