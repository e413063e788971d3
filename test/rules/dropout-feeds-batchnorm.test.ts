// Table test for dropout-feeds-batchnorm: paths from a dropout to a BatchNorm through non-norm layers and tensor ops.
import { expect, test } from 'vitest';
import rule from '../../rules/dropout-feeds-batchnorm';
import { runRuleTable } from '../helpers/rule-tester';
import type { Rule } from '../../server/src/engine/rule';

const H = 'import torch\nimport torch.nn as nn\nimport torch.nn.functional as F\nfrom collections import OrderedDict\n';

test('dropout-feeds-batchnorm', async () => {
  await runRuleTable(rule as unknown as Rule, {
    valid: [
      {
        name: 'dropout after the last BatchNorm, in an OrderedDict classifier',
        code: `${H}class M(nn.Module):\n    def __init__(self):\n        super().__init__()\n        self.features = nn.Sequential(nn.Conv2d(3, 16, 3, bias=False), nn.BatchNorm2d(16), nn.ReLU())\n        self.classifier = nn.Sequential(OrderedDict([\n            ('pool', nn.AdaptiveAvgPool2d(1)),\n            ('flatten', nn.Flatten()),\n            ('drop', nn.Dropout(0.3)),\n            ('fc', nn.Linear(16, 5)),\n        ]))\n    def forward(self, x):\n        return self.classifier(self.features(x))\n`,
      },
      {
        name: 'a GroupNorm between the dropout and the BatchNorm',
        code: `${H}class M(nn.Module):\n    def __init__(self):\n        super().__init__()\n        self.drop = nn.Dropout2d(0.1)\n        self.gn = nn.GroupNorm(8, 32)\n        self.conv = nn.Conv2d(32, 32, 3, padding=1, bias=False)\n        self.bn = nn.BatchNorm2d(32)\n    def forward(self, x):\n        return self.bn(self.conv(self.gn(self.drop(x))))\n`,
      },
      {
        name: 'functional dropout before the final Linear of a BatchNorm network',
        code: `${H}class M(nn.Module):\n    def __init__(self):\n        super().__init__()\n        self.conv = nn.Conv2d(3, 8, 3, bias=False)\n        self.bn = nn.BatchNorm2d(8)\n        self.fc = nn.Linear(8, 2)\n    def forward(self, x):\n        x = F.relu(self.bn(self.conv(x)))\n        x = torch.flatten(F.adaptive_avg_pool2d(x, 1), 1)\n        x = F.dropout(x, p=0.2, training=self.training)\n        return self.fc(x)\n`,
      },
      {
        name: 'dropout then LayerNorm in a transformer-style block',
        code: `${H}class M(nn.Module):\n    def __init__(self, d=64):\n        super().__init__()\n        self.ff = nn.Linear(d, d)\n        self.drop = nn.Dropout(0.1)\n        self.ln = nn.LayerNorm(d)\n    def forward(self, x):\n        return self.ln(self.drop(self.ff(x)))\n`,
      },
    ],
    invalid: [
      {
        name: 'Dropout2d straight into BatchNorm2d in a Sequential',
        code: `${H}from torch.nn import BatchNorm2d as BN\nclass M(nn.Module):\n    def __init__(self):\n        super().__init__()\n        self.fuse = nn.Sequential(\n            nn.Dropout2d(0.1),\n#           ^^^^^^^^^^^^^^^^^ dropout-feeds-batchnorm:feeds\n            BN(128),\n            nn.ReLU(inplace=True),\n        )\n    def forward(self, x):\n        return self.fuse(x)\n`,
        verify(found) {
          expect(found[0].message).toContain('Dropout2d `fuse.0` (p=0.1) (main.py:10) feeds BatchNorm2d `fuse.1` (main.py:11) with no other normalization between.');
          expect(found[0].related[0].span.line).toBe(10);
        },
      },
      {
        name: 'dropout reaches BatchNorm through a conv and F.relu',
        code: `${H}class M(nn.Module):\n    def __init__(self):\n        super().__init__()\n        self.drop = nn.Dropout(0.3)\n#                   ^^^^^^^^^^^^^^^ dropout-feeds-batchnorm\n        self.conv = nn.Conv2d(16, 16, 3, padding=1, bias=False)\n        self.bn = nn.BatchNorm2d(16)\n    def forward(self, x):\n        x = F.relu(self.conv(self.drop(x)))\n        return self.bn(x)\n`,
        verify(found) {
          expect(found[0].message).toContain('feeds BatchNorm2d `bn` (main.py:10) through Conv2d `conv`, `F.relu` with no other normalization between');
        },
      },
      {
        name: 'functional dropout then a view into BatchNorm1d',
        code: `${H}class M(nn.Module):\n    def __init__(self):\n        super().__init__()\n        self.bn = nn.BatchNorm1d(64)\n    def forward(self, x):\n        x = F.dropout(x, 0.5, self.training)\n#           ^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^ dropout-feeds-batchnorm\n        return self.bn(x.flatten(1))\n`,
        verify(found) {
          expect(found[0].message).toContain('`F.dropout` (main.py:10) feeds BatchNorm1d `bn` (main.py:8) through `Tensor.flatten`');
        },
      },
      {
        name: 'repeated helper blocks: each block\'s dropout feeds the next block\'s BatchNorm, one finding at the helper',
        code: `${H}def block(c_in, c_out):\n    return nn.Sequential(nn.Conv2d(c_in, c_out, 3, padding=1, bias=False), nn.BatchNorm2d(c_out), nn.ReLU(), nn.Dropout(0.1))\n#                                                                                                            ^^^^^^^^^^^^^^^ dropout-feeds-batchnorm\nclass M(nn.Module):\n    def __init__(self):\n        super().__init__()\n        self.blocks = nn.ModuleList([block(3, 16), block(16, 32), block(32, 64)])\n    def forward(self, x):\n        for b in self.blocks:\n            x = b(x)\n        return x\n`,
        verify(found) {
          expect(found).toHaveLength(1);
          expect(found[0].message).toContain('Dropout `blocks.0.3` (p=0.1) (main.py:6) feeds BatchNorm2d `blocks.1.1` (main.py:6) through Conv2d `blocks.1.0`');
        },
      },
    ],
  });
});
