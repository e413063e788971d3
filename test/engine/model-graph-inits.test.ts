// Model-graph facts the SELU and norm rules share: init calls made during construction, isinstance/modules()/apply()
// in init loops, tensor-call links through forward (downstream), and the activation profile.
import { describe, expect, test } from 'vitest';
import { Views } from '../../server/src/engine/views';
import { isTorchSubclass } from '../../server/src/engine/torch-catalog';
import { activationProfile } from '../../server/src/engine/views/activations';
import { ModelGraphs, isForwardCall, tensorCallName } from '../../server/src/engine/views/model-graph';
import { engineFor, type Files } from '../helpers/rule-tester';

async function graph(files: Files | string, cls: string, path = 'main.py') {
  const f = typeof files === 'string' ? { 'main.py': files } : files;
  const e = await engineFor([], f);
  const views = new Views(e.ws);
  const g = views.models.graphsIn(path).find((x) => x.className === cls);
  if (!g) throw new Error(`no graph for ${cls}`);
  return { g, views };
}

const initLine = (g: Awaited<ReturnType<typeof graph>>['g']) => g.inits.map((i) => `${i.q.replace('torch.nn.init.', '')}@${i.call.span.line + 1}>${i.layer?.name ?? '?'}.${i.param ?? '?'}`);

describe('init calls', () => {
  test('for m in self.modules() with isinstance picks the matching layers only', async () => {
    const { g } = await graph(
      [
        'import torch.nn as nn',
        'class M(nn.Module):',
        '    def __init__(self):',
        '        super().__init__()',
        '        self.conv = nn.Conv2d(3, 8, 3)',
        '        self.bn = nn.BatchNorm2d(8)',
        '        self.fc = nn.Linear(8, 2)',
        '        for m in self.modules():',
        '            if isinstance(m, (nn.Conv2d, nn.Linear)):',
        "                nn.init.kaiming_normal_(m.weight, nonlinearity='relu')",
        '            elif isinstance(m, nn.modules.batchnorm._BatchNorm):',
        '                nn.init.ones_(m.weight)',
        '                m.bias.data.zero_()',
      ].join('\n'),
      'M',
    );
    expect(initLine(g)).toEqual(['kaiming_normal_@10>conv.weight', 'ones_@12>bn.weight', 'tensor.zero_@13>bn.bias', 'kaiming_normal_@10>fc.weight']);
  });

  test('self.apply(fn) calls fn on children first, then the module; user classes answer isinstance by their MRO', async () => {
    const { g } = await graph(
      [
        'import torch.nn as nn',
        'from torch.nn import init',
        'class Block(nn.Module):',
        '    def __init__(self):',
        '        super().__init__()',
        '        self.fc = nn.Linear(4, 4)',
        'def init_fn(m):',
        '    if isinstance(m, Block):',
        '        init.normal_(m.fc.weight, std=0.5)',
        '    if isinstance(m, nn.Linear):',
        '        init.xavier_uniform_(m.weight)',
        'class M(nn.Module):',
        '    def __init__(self):',
        '        super().__init__()',
        '        self.b = Block()',
        '        self.apply(init_fn)',
      ].join('\n'),
      'M',
    );
    expect(initLine(g)).toEqual(['xavier_uniform_@11>b.fc.weight', 'normal_@9>b.fc.weight']);
  });
});

describe('tensor-call links', () => {
  test('downstream follows layers, functional calls and tensor methods by tensor identity', async () => {
    const { g } = await graph(
      [
        'import torch',
        'import torch.nn as nn',
        'import torch.nn.functional as F',
        'class M(nn.Module):',
        '    def __init__(self):',
        '        super().__init__()',
        '        self.conv = nn.Conv2d(3, 8, 3)',
        '        self.bn = nn.BatchNorm1d(8)',
        '    def forward(self, x):',
        '        x = F.dropout(x, 0.1, self.training)',
        '        x = F.relu(self.conv(x))',
        '        x = torch.flatten(x.mean(3), 1)',
        '        return self.bn(x)',
      ].join('\n'),
      'M',
    );
    const drop = g.calls.find((c) => tensorCallName(c) === 'torch.nn.functional.dropout')!;
    const reached = ModelGraphs.downstream(g, drop, () => true);
    expect(reached.map((r) => `${r.layer.name} via ${r.via.map((n) => (isForwardCall(n) ? tensorCallName(n) : n.name)).join(',')}`)).toEqual([
      'conv via ',
      'bn via conv,torch.nn.functional.relu,tensor.mean,torch.flatten',
    ]);
    // a path stops where `through` says so
    expect(ModelGraphs.downstream(g, drop, (n) => !isForwardCall(n)).map((r) => r.layer.name)).toEqual(['conv']);
  });

  test('activation profile: functional SELU makes a SELU network, a ReLU anywhere makes it mixed', async () => {
    const seluNet = await graph('import torch.nn as nn\nimport torch.nn.functional as F\nclass M(nn.Module):\n    def __init__(self):\n        super().__init__()\n        self.fc = nn.Linear(4, 4)\n    def forward(self, x):\n        return F.selu(self.fc(x))\n', 'M');
    const p = activationProfile(seluNet.g);
    expect([p.seluNetwork, p.selu.map((u) => u.label), p.reluFamily.length]).toEqual([true, ['F.selu'], 0]);
    const mixed = await graph('import torch.nn as nn\nclass M(nn.Module):\n    def __init__(self):\n        super().__init__()\n        self.net = nn.Sequential(nn.Linear(4, 4), nn.ReLU(), nn.Linear(4, 4), nn.SELU())\n    def forward(self, x):\n        return self.net(x)\n', 'M');
    const q = activationProfile(mixed.g);
    expect([q.seluNetwork, q.selu.map((u) => u.layer?.name), q.reluFamily.map((u) => u.layer?.name)]).toEqual([false, ['net.3'], ['net.1']]);
  });

  test('calleeOwner resolves the module a callee attribute belongs to', async () => {
    const { g, views } = await graph('from torch import nn\nimport torch.nn.functional as Fn\nclass M(nn.Module):\n    def __init__(self):\n        super().__init__()\n        self.d = nn.Dropout(0.1)\n    def forward(self, x):\n        return Fn.dropout(self.d(x))\n', 'M');
    expect(views.models.calleeOwner('main.py', g.layers[0].site!.call)).toBe('torch.nn');
    const fc = g.calls.find((c) => tensorCallName(c) === 'torch.nn.functional.dropout')!;
    expect(views.models.calleeOwner('main.py', fc.call)).toBe('torch.nn.functional');
  });
});

describe('named_modules() in init loops', () => {
  test("name tests like `'head' in name` are substring tests", async () => {
    const { g } = await graph(
      [
        'import torch.nn as nn',
        'class M(nn.Module):',
        '    def __init__(self):',
        '        super().__init__()',
        '        self.body = nn.Linear(4, 4)',
        '        self.head = nn.Sequential(nn.Linear(4, 2))',
        '        for name, m in self.named_modules():',
        "            if 'head' in name and isinstance(m, nn.Linear):",
        '                nn.init.zeros_(m.weight)',
      ].join('\n'),
      'M',
    );
    expect(initLine(g)).toEqual(['zeros_@9>head.0.weight']);
  });
});

describe('isTorchSubclass', () => {
  test('subclass facts of torch.nn (issubclass as measured with the Debian PyTorch)', () => {
    const pairs: [string, string, boolean | undefined][] = [
      ['torch.nn.LazyLinear', 'torch.nn.Linear', true],
      ['torch.nn.LazyConv2d', 'torch.nn.Conv2d', true],
      ['torch.nn.LazyBatchNorm2d', 'torch.nn.BatchNorm2d', false],
      ['torch.nn.AlphaDropout', 'torch.nn.modules.dropout._DropoutNd', true],
      ['torch.nn.FeatureAlphaDropout', 'torch.nn.modules.dropout._DropoutNd', true],
      ['torch.nn.SyncBatchNorm', 'torch.nn.modules.batchnorm._BatchNorm', true],
      ['torch.nn.InstanceNorm2d', 'torch.nn.modules.batchnorm._NormBase', true],
      ['torch.nn.InstanceNorm2d', 'torch.nn.modules.batchnorm._BatchNorm', false],
      ['torch.nn.Bilinear', 'torch.nn.Linear', false],
      ['torch.nn.Sequential', 'torch.nn.Linear', false],
      ['torch.nn.Conv2d', 'torch.nn.Module', true],
      // a class the catalog does not describe: cannot tell
      ['torch.nn.MultiheadAttention', 'torch.nn.Linear', undefined],
    ];
    expect(pairs.map(([t, b]) => isTorchSubclass(t, b))).toEqual(pairs.map(([, , want]) => want));
  });
});
