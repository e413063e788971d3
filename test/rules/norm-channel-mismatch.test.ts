// Table test for norm-channel-mismatch: declared channels vs traced channels, and BatchNorm rank vs input rank.
import { expect, test } from 'vitest';
import rule from '../../rules/norm-channel-mismatch';
import { runRuleTable } from '../helpers/rule-tester';
import type { Rule } from '../../server/src/engine/rule';

const H = 'import torch\nimport torch.nn as nn\nimport torch.nn.functional as F\n';

test('norm-channel-mismatch', async () => {
  await runRuleTable(rule as unknown as Rule, {
    valid: [
      {
        name: 'DenseNet: blocks and transitions registered with add_module("denseblock%d" % (i + 1)) before norm5',
        code: `${H}class Layer(nn.Module):\n    def __init__(self, i, g):\n        super().__init__()\n        self.norm1 = nn.BatchNorm2d(i)\n        self.conv1 = nn.Conv2d(i, g, 3, padding=1, bias=False)\n    def forward(self, feats):\n        return self.conv1(F.relu(self.norm1(torch.cat(feats, 1))))\nclass Block(nn.ModuleDict):\n    def __init__(self, n, i, g):\n        super().__init__()\n        for k in range(n):\n            self.add_module("denselayer%d" % (k + 1), Layer(i + k * g, g))\n    def forward(self, x):\n        feats = [x]\n        for name, layer in self.items():\n            feats.append(layer(feats))\n        return torch.cat(feats, 1)\nclass Transition(nn.Sequential):\n    def __init__(self, i, o):\n        super().__init__()\n        self.norm = nn.BatchNorm2d(i)\n        self.conv = nn.Conv2d(i, o, 1, bias=False)\nclass DenseNet(nn.Module):\n    def __init__(self, growth=4, cfg=(2, 2), init=8):\n        super().__init__()\n        self.features = nn.Sequential(nn.Conv2d(3, init, 3, bias=False), nn.BatchNorm2d(init), nn.ReLU())\n        c = init\n        for i, n in enumerate(cfg):\n            self.features.add_module("denseblock%d" % (i + 1), Block(n, c, growth))\n            c = c + n * growth\n            if i != len(cfg) - 1:\n                self.features.add_module(f"transition{i + 1}", Transition(c, c // 2))\n                c = c // 2\n        self.features.add_module("norm5", nn.BatchNorm2d(c))\n    def forward(self, x):\n        return self.features(x)\n`,
      },
      {
        name: 'a block registered under a name the engine cannot spell is not skipped over',
        code: `${H}class DenseNet(nn.Module):\n    def __init__(self):\n        super().__init__()\n        self.features = nn.Sequential(nn.Conv2d(3, 8, 3, bias=False), nn.MaxPool2d(2))\n        for i in range(2):\n            self.features.add_module(f"block{i:02d}", nn.Conv2d(8 + 8 * i, 16 + 8 * i, 1, bias=False))\n        self.features.add_module("norm5", nn.BatchNorm2d(24))\n    def forward(self, x):\n        return self.features(x)\n`,
      },
      {
        name: 'torch.cat of two 64-channel branches feeds BatchNorm2d(128)',
        code: `${H}class M(nn.Module):\n    def __init__(self):\n        super().__init__()\n        self.a = nn.Conv2d(32, 64, 1)\n        self.b = nn.Conv2d(32, 64, 3, padding=1)\n        self.bn = nn.BatchNorm2d(128)\n    def forward(self, x):\n        return self.bn(torch.cat([self.a(x), self.b(x)], dim=1))\n`,
      },
      {
        name: 'torchvision-style norm_layer(planes) after conv3x3 helper',
        code: `${H}def conv3x3(i, o):\n    return nn.Conv2d(i, o, 3, padding=1, bias=False)\nclass Block(nn.Module):\n    def __init__(self, inplanes=64, planes=64, norm_layer=None):\n        super().__init__()\n        norm_layer = norm_layer or nn.BatchNorm2d\n        self.conv1 = conv3x3(inplanes, planes)\n        self.bn1 = norm_layer(planes)\n    def forward(self, x):\n        return F.relu(self.bn1(self.conv1(x)))\n`,
      },
      {
        name: 'channels unknown after a view: quiet',
        code: `${H}class M(nn.Module):\n    def __init__(self):\n        super().__init__()\n        self.fc = nn.Linear(64, 96)\n        self.bn = nn.BatchNorm1d(32)\n    def forward(self, x):\n        x = self.fc(x).view(-1, 32, 3)\n        return self.bn(x)\n`,
      },
      {
        name: 'BatchNorm1d on a Linear output and InstanceNorm without parameters',
        code: `${H}class M(nn.Module):\n    def __init__(self):\n        super().__init__()\n        self.fc = nn.Linear(8, 32, bias=False)\n        self.bn = nn.BatchNorm1d(32)\n        self.conv = nn.Conv2d(3, 4, 3)\n        self.inorm = nn.InstanceNorm2d(8)\n    def forward(self, x, img):\n        return self.bn(self.fc(x)), self.inorm(self.conv(img))\n`,
      },
    ],
    invalid: [
      {
        name: 'conv reduces to 96 channels, BatchNorm2d still sized 128',
        code: `${H}class M(nn.Module):\n    def __init__(self):\n        super().__init__()\n        self.reduce = nn.Conv2d(128, 96, kernel_size=3, padding=1, bias=False)\n        self.bn = nn.BatchNorm2d(128)\n#                 ^^^^^^^^^^^^^^^^^^^ norm-channel-mismatch:channels\n    def forward(self, x):\n        return F.relu(self.bn(self.reduce(x)))\n`,
        fixKind: 'suggested',
        output: `${H}class M(nn.Module):\n    def __init__(self):\n        super().__init__()\n        self.reduce = nn.Conv2d(128, 96, kernel_size=3, padding=1, bias=False)\n        self.bn = nn.BatchNorm2d(96)\n    def forward(self, x):\n        return F.relu(self.bn(self.reduce(x)))\n`,
        verify(found) {
          expect(found[0].message).toBe('BatchNorm2d `bn` declares num_features=128, but forward feeds it 96 channels (the output of Conv2d `reduce` at main.py:7); forward raises RuntimeError "running_mean should contain 96 elements not 128".');
          expect(found[0].related[0].span.line).toBe(6);
        },
      },
      {
        name: 'BatchNorm2d after a Linear gets 2-D input',
        code: `${H}class M(nn.Module):\n    def __init__(self):\n        super().__init__()\n        self.pool = nn.AdaptiveAvgPool2d(1)\n        self.fc1 = nn.Linear(128, 64, bias=False)\n        self.norm = nn.BatchNorm2d(64)\n#                   ^^^^^^^^^^^^^^^^^^ norm-channel-mismatch:rank\n    def forward(self, x):\n        x = self.pool(x).flatten(1)\n        return F.relu(self.norm(self.fc1(x)))\n`,
        fixKind: 'suggested',
        output: `${H}class M(nn.Module):\n    def __init__(self):\n        super().__init__()\n        self.pool = nn.AdaptiveAvgPool2d(1)\n        self.fc1 = nn.Linear(128, 64, bias=False)\n        self.norm = nn.BatchNorm1d(64)\n    def forward(self, x):\n        x = self.pool(x).flatten(1)\n        return F.relu(self.norm(self.fc1(x)))\n`,
        verify(found) {
          expect(found[0].message).toBe('BatchNorm2d `norm` expects 4-D input (N, C, H, W) but receives 2-D input (the output of Linear `fc1` at main.py:8); forward raises ValueError "expected 4D input (got 2D input)". nn.BatchNorm1d fits this input.');
        },
      },
      {
        name: 'BatchNorm1d after a 2-D conv in a Sequential',
        code: `${H}class M(nn.Module):\n    def __init__(self):\n        super().__init__()\n        self.body = nn.Sequential(nn.Conv2d(3, 16, 3, bias=False), nn.BatchNorm1d(16), nn.ReLU())\n#                                                                  ^^^^^^^^^^^^^^^^^^ norm-channel-mismatch:rank\n    def forward(self, x):\n        return self.body(x)\n`,
        fixKind: 'suggested',
        output: `${H}class M(nn.Module):\n    def __init__(self):\n        super().__init__()\n        self.body = nn.Sequential(nn.Conv2d(3, 16, 3, bias=False), nn.BatchNorm2d(16), nn.ReLU())\n    def forward(self, x):\n        return self.body(x)\n`,
        verify(found) {
          expect(found[0].message).toContain('expected 2D or 3D input (got 4D input)');
        },
      },
      {
        name: 'GroupNorm channels from a parent that passes other widths; no literal to rewrite',
        code: `${H}class Block(nn.Module):\n    def __init__(self, c_in=16, c_out=32, groups=8):\n        super().__init__()\n        self.conv = nn.Conv2d(c_in, c_out, 3, padding=1, bias=False)\n        self.gn = nn.GroupNorm(groups, c_in)\n#                 ^^^^^^^^^^^^^^^^^^^^^^^^^^ norm-channel-mismatch:channels\n    def forward(self, x):\n        return self.gn(self.conv(x))\nclass Net(nn.Module):\n    def __init__(self):\n        super().__init__()\n        self.b1 = Block(16, 32)\n        self.b2 = Block(32, 64)\n    def forward(self, x):\n        return self.b2(self.b1(x))\n`,
        fixKind: 'suggested',
        verify(found) {
          expect(found).toHaveLength(1);
          expect(found[0].message).toContain('GroupNorm `gn` declares num_channels=16, but forward feeds it 32 channels (the output of Conv2d `conv` at main.py:7)');
          expect(found[0].fixes).toEqual([]);
        },
      },
    ],
  });
});
