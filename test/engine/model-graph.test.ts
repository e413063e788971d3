// Fixture tests for the model graph: each idiom real PyTorch code uses, asserted by layer name, type, line and feed.
import { describe, expect, test } from 'vitest';
import { Views } from '../../server/src/engine/views';
import { show } from '../../server/src/engine/values';
import { engineFor, type Files } from '../helpers/rule-tester';

async function graph(files: Files | string, cls: string, path = 'main.py') {
  const f = typeof files === 'string' ? { 'main.py': files } : files;
  const e = await engineFor([], f);
  const g = new Views(e.ws).models.graphsIn(path).find((x) => x.className === cls);
  if (!g) throw new Error(`no graph for ${cls}`);
  return {
    g,
    /** name → "type@line" (1-based line of the constructor call) */
    layers: g.layers.map((l) => `${l.name} ${l.type}@${l.site ? `${l.site.path === path ? '' : `${l.site.path}:`}${l.site.call.span.line + 1}` : '?'}`),
    flow: g.flow.map(([a, b]) => `${a.name}>${b.name}`),
    arg: (layer: string, name: string) => show(g.layers.find((l) => l.name === layer)?.inst.args.get(name)),
  };
}

describe('imports', () => {
  test('import torch.nn as nn / from torch import nn / aliased class / torch.nn.X', async () => {
    const { layers, flow } = await graph(
      [
        'import torch',
        'from torch import nn',
        'from torch.nn import BatchNorm2d as BN',
        'import torch.nn as tnn',
        'class M(nn.Module):',
        '    def __init__(self):',
        '        super().__init__()',
        '        self.a = tnn.Conv2d(3, 8, 3)',
        '        self.b = BN(8)',
        '        self.c = torch.nn.ReLU()',
        '    def forward(self, x):',
        '        return self.c(self.b(self.a(x)))',
      ].join('\n'),
      'M',
    );
    expect(layers).toEqual(['a torch.nn.Conv2d@8', 'b torch.nn.BatchNorm2d@9', 'c torch.nn.ReLU@10']);
    expect(flow).toEqual(['a>b', 'b>c']);
  });
});

describe('private module paths', () => {
  test('torch.nn.modules.<file>.<Class> resolves to the public torch.nn name', async () => {
    const { layers } = await graph(
      [
        'import torch.nn as nn',
        'from torch.nn.modules.batchnorm import BatchNorm2d',
        'class M(nn.Module):',
        '    def __init__(self):',
        '        super().__init__()',
        '        self.a = nn.modules.conv.Conv2d(3, 8, 3)',
        '        self.b = BatchNorm2d(8)',
        '        self.c = nn.modules.batchnorm.BatchNorm2d(8)',
      ].join('\n'),
      'M',
    );
    expect(layers).toEqual(['a torch.nn.Conv2d@6', 'b torch.nn.BatchNorm2d@7', 'c torch.nn.BatchNorm2d@8']);
  });
});

describe('norm_layer parameters and partial', () => {
  const block = (extra: string) => [
    'import torch.nn as nn',
    'import functools',
    'class Block(nn.Module):',
    `    def __init__(self, planes=16, norm_layer=${extra}):`,
    '        super().__init__()',
    '        if norm_layer is None:',
    '            norm_layer = nn.BatchNorm2d',
    '        self.conv = nn.Conv2d(planes, planes, 3, bias=False)',
    '        self.bn = norm_layer(planes)',
    '    def forward(self, x):',
    '        return self.bn(self.conv(x))',
    'class Net(nn.Module):',
    '    def __init__(self):',
    '        super().__init__()',
    '        self.b = Block(8, norm_layer=functools.partial(nn.BatchNorm2d, momentum=0.01))',
    '    def forward(self, x):',
    '        return self.b(x)',
  ].join('\n');

  test('norm_layer=None then assigned in the body', async () => {
    const { layers, arg, flow } = await graph(block('None'), 'Block');
    expect(layers).toEqual(['conv torch.nn.Conv2d@8', 'bn torch.nn.BatchNorm2d@9']);
    expect(arg('bn', 'num_features')).toBe(16);
    expect(arg('bn', 'momentum')).toBe(0.1);
    expect(flow).toEqual(['conv>bn']);
  });

  test('norm_layer=nn.BatchNorm2d default', async () => {
    const { layers } = await graph(block('nn.BatchNorm2d'), 'Block');
    expect(layers).toEqual(['conv torch.nn.Conv2d@8', 'bn torch.nn.BatchNorm2d@9']);
  });

  test('functools.partial passed by a parent module keeps its keywords', async () => {
    const { layers, arg, flow } = await graph(block('None'), 'Net');
    expect(layers).toEqual(['b.conv torch.nn.Conv2d@8', 'b.bn torch.nn.BatchNorm2d@9']);
    expect(arg('b.bn', 'momentum')).toBe(0.01);
    expect(arg('b.bn', 'num_features')).toBe(8);
    expect(flow).toEqual(['b.conv>b.bn']);
  });
});

describe('helpers and containers', () => {
  test('helper returning a layer and a Sequential; list built with append, += and a loop', async () => {
    const { layers, flow, arg } = await graph(
      [
        'import torch.nn as nn',
        'def conv3x3(i, o, stride=1):',
        '    return nn.Conv2d(i, o, 3, stride=stride, padding=1, bias=False)',
        'def conv_bn(i, o):',
        '    return nn.Sequential(conv3x3(i, o), nn.BatchNorm2d(o), nn.ReLU(inplace=True))',
        'class M(nn.Module):',
        '    def __init__(self, widths=(8, 16, 32)):',
        '        super().__init__()',
        '        layers = []',
        '        c = 3',
        '        for w in widths:',
        '            layers.append(conv_bn(c, w))',
        '            c = w',
        '        layers += [nn.AdaptiveAvgPool2d(1)]',
        '        self.features = nn.Sequential(*layers)',
        '    def forward(self, x):',
        '        return self.features(x)',
      ].join('\n'),
      'M',
    );
    expect(layers).toEqual([
      'features.0.0 torch.nn.Conv2d@3', 'features.0.1 torch.nn.BatchNorm2d@5', 'features.0.2 torch.nn.ReLU@5',
      'features.1.0 torch.nn.Conv2d@3', 'features.1.1 torch.nn.BatchNorm2d@5', 'features.1.2 torch.nn.ReLU@5',
      'features.2.0 torch.nn.Conv2d@3', 'features.2.1 torch.nn.BatchNorm2d@5', 'features.2.2 torch.nn.ReLU@5',
      'features.3 torch.nn.AdaptiveAvgPool2d@14',
    ]);
    expect(arg('features.2.0', 'in_channels')).toBe(16);
    expect(arg('features.2.1', 'num_features')).toBe(32);
    expect(flow).toEqual([
      'features.0.0>features.0.1', 'features.0.1>features.0.2', 'features.0.2>features.1.0',
      'features.1.0>features.1.1', 'features.1.1>features.1.2', 'features.1.2>features.2.0',
      'features.2.0>features.2.1', 'features.2.1>features.2.2', 'features.2.2>features.3',
    ]);
  });

  test('Sequential(OrderedDict), ModuleList comprehension and loop, add_module', async () => {
    const { layers, flow } = await graph(
      [
        'import torch.nn as nn',
        'from collections import OrderedDict',
        'class M(nn.Module):',
        '    def __init__(self):',
        '        super().__init__()',
        "        self.stem = nn.Sequential(OrderedDict([('conv', nn.Conv2d(3, 8, 3)), ('bn', nn.BatchNorm2d(8))]))",
        '        self.blocks = nn.ModuleList([nn.Conv2d(8, 8, 3) for _ in range(2)])',
        '        self.heads = nn.ModuleList()',
        '        for i in range(2):',
        '            self.heads.append(nn.Linear(8, 2))',
        "        self.add_module('act', nn.ReLU())",
        '    def forward(self, x):',
        '        x = self.stem(x)',
        '        for blk in self.blocks:',
        '            x = blk(x)',
        '        return self.act(x)',
      ].join('\n'),
      'M',
    );
    expect(layers).toEqual([
      'stem.conv torch.nn.Conv2d@6', 'stem.bn torch.nn.BatchNorm2d@6', 'blocks.0 torch.nn.Conv2d@7', 'blocks.1 torch.nn.Conv2d@7',
      'heads.0 torch.nn.Linear@10', 'heads.1 torch.nn.Linear@10', 'act torch.nn.ReLU@11',
    ]);
    expect(flow).toEqual(['stem.conv>stem.bn', 'stem.bn>blocks.0', 'blocks.0>blocks.1', 'blocks.1>act']);
  });
});

describe('forward data path', () => {
  const model = (fwd: string[]) => [
    'import torch',
    'import torch.nn as nn',
    'import torch.nn.functional as F',
    'class M(nn.Module):',
    '    def __init__(self):',
    '        super().__init__()',
    '        self.conv = nn.Conv2d(8, 8, 3, padding=1)',
    '        self.bn = nn.BatchNorm2d(8)',
    '        self.conv2 = nn.Conv2d(8, 8, 3, padding=1)',
    '    def forward(self, x):',
    ...fwd.map((l) => `        ${l}`),
  ].join('\n');

  test('reassigned local keeps the feed', async () => {
    expect((await graph(model(['x = self.conv(x)', 'x = self.bn(x)', 'return x']), 'M')).flow).toEqual(['conv>bn']);
  });
  test('F.relu between layers breaks it', async () => {
    expect((await graph(model(['return self.bn(F.relu(self.conv(x)))']), 'M')).flow).toEqual([]);
  });
  test('torch.relu between layers breaks it', async () => {
    expect((await graph(model(['y = torch.relu(self.conv(x))', 'return self.bn(y)']), 'M')).flow).toEqual([]);
  });
  test('in-place residual add breaks it', async () => {
    expect((await graph(model(['out = self.conv(x)', 'out += x', 'return self.bn(out)']), 'M')).flow).toEqual([]);
  });
  test('torch.cat breaks it and sums channels', async () => {
    const r = await graph(model(['a = self.conv(x)', 'b = self.conv2(x)', 'y = torch.cat([a, b], dim=1)', 'return self.bn(y)']), 'M');
    expect(r.flow).toEqual([]);
    expect(r.g.layers.find((l) => l.name === 'bn')?.input?.ch).toBe(16);
  });
  test('a branch the engine can decide follows only that branch', async () => {
    const src = model(['if self.bn is not None:', '    x = self.bn(self.conv(x))', 'else:', '    x = self.conv2(x)', 'return x']);
    expect((await graph(src, 'M')).flow).toEqual(['conv>bn']);
  });
});

describe('across files', () => {
  test('a block class from another module, under the attribute prefix', async () => {
    const files: Files = {
      'pkg/__init__.py': '',
      'pkg/blocks.py': [
        'from torch import nn',
        'class Block(nn.Module):',
        '    def __init__(self, c):',
        '        super().__init__()',
        '        self.conv = nn.Conv2d(c, c, 3)',
        '        self.bn = nn.BatchNorm2d(c)',
        '    def forward(self, x):',
        '        return self.bn(self.conv(x))',
      ].join('\n'),
      'pkg/net.py': [
        'from torch import nn',
        'from .blocks import Block',
        'class Base(nn.Module):',
        '    pass',
        'class Net(Base):',
        '    def __init__(self):',
        '        super().__init__()',
        '        self.enc = nn.Sequential(Block(4), Block(4))',
        '    def forward(self, x):',
        '        return self.enc(x)',
      ].join('\n'),
    };
    const { layers, flow } = await graph(files, 'Net', 'pkg/net.py');
    expect(layers).toEqual([
      'enc.0.conv torch.nn.Conv2d@pkg/blocks.py:5', 'enc.0.bn torch.nn.BatchNorm2d@pkg/blocks.py:6',
      'enc.1.conv torch.nn.Conv2d@pkg/blocks.py:5', 'enc.1.bn torch.nn.BatchNorm2d@pkg/blocks.py:6',
    ]);
    expect(flow).toEqual(['enc.0.conv>enc.0.bn', 'enc.0.bn>enc.1.conv', 'enc.1.conv>enc.1.bn']);
  });

  test('what cannot be resolved stays unknown', async () => {
    const { g } = await graph(
      ['import torch.nn as nn', 'from elsewhere import make_block', 'class M(nn.Module):', '    def __init__(self, c):', '        super().__init__()', '        self.x = make_block(c)', '        self.bn = nn.BatchNorm2d(c)', '    def forward(self, x):', '        return self.bn(self.x(x))'].join('\n'),
      'M',
    );
    expect(g.layers.map((l) => l.name)).toEqual(['bn']);
    expect(show(g.layers[0].inst.args.get('num_features'))).toBe('?');
    expect(g.flow).toEqual([]);
  });
});
