// Table test for bias-before-norm: quiet idioms from real code, flagged cases with exact ranges and fixed text.
import { test } from 'vitest';
import rule from '../../rules/bias-before-norm';
import { runRuleTable } from '../helpers/rule-tester';
import type { Rule } from '../../server/src/engine/rule';

const H = 'import torch.nn as nn\nimport torch.nn.functional as F\n';

test('bias-before-norm', async () => {
  await runRuleTable(rule as unknown as Rule, {
    valid: [
      {
        name: 'activation between conv and BatchNorm',
        code: `${H}class M(nn.Module):\n    def __init__(self):\n        super().__init__()\n        self.conv = nn.Conv2d(3, 8, 3)\n        self.bn = nn.BatchNorm2d(8)\n    def forward(self, x):\n        return self.bn(F.relu(self.conv(x)))\n`,
      },
      {
        name: 'LayerNorm after Linear keeps the bias meaningful',
        code: `${H}net = None\nclass M(nn.Module):\n    def __init__(self):\n        super().__init__()\n        self.body = nn.Sequential(nn.Linear(8, 8), nn.LayerNorm(8))\n    def forward(self, x):\n        return self.body(x)\n`,
      },
      {
        name: 'GroupNorm with fewer groups than channels',
        code: `${H}class M(nn.Module):\n    def __init__(self):\n        super().__init__()\n        self.body = nn.Sequential(nn.Conv2d(3, 32, 3), nn.GroupNorm(8, 32))\n    def forward(self, x):\n        return self.body(x)\n`,
      },
      {
        name: 'bias=False passed through a helper',
        code: `${H}def conv3x3(i, o):\n    return nn.Conv2d(i, o, 3, padding=1, bias=False)\nclass M(nn.Module):\n    def __init__(self, norm_layer=None):\n        super().__init__()\n        if norm_layer is None:\n            norm_layer = nn.BatchNorm2d\n        self.conv = conv3x3(3, 16)\n        self.bn = norm_layer(16)\n    def forward(self, x):\n        return self.bn(self.conv(x))\n`,
      },
      {
        name: 'residual add between conv and BatchNorm',
        code: `${H}class M(nn.Module):\n    def __init__(self):\n        super().__init__()\n        self.conv = nn.Conv2d(8, 8, 3, padding=1)\n        self.bn = nn.BatchNorm2d(8)\n    def forward(self, x):\n        out = self.conv(x)\n        out += x\n        return self.bn(out)\n`,
      },
    ],
    invalid: [
      {
        name: 'Sequential conv then BatchNorm',
        code: `${H}class M(nn.Module):\n    def __init__(self):\n        super().__init__()\n        self.body = nn.Sequential(nn.Conv2d(3, 16, 3), nn.BatchNorm2d(16), nn.ReLU())\n#                                 ^^^^^^^^^^^^^^^^^^^ bias-before-norm:cancelled\n    def forward(self, x):\n        return self.body(x)\n`,
        output: `${H}class M(nn.Module):\n    def __init__(self):\n        super().__init__()\n        self.body = nn.Sequential(nn.Conv2d(3, 16, 3, bias=False), nn.BatchNorm2d(16), nn.ReLU())\n    def forward(self, x):\n        return self.body(x)\n`,
        verify(found) {
          const m = found[0].message;
          if (!m.includes('Conv2d `body.0`') || !m.includes('BatchNorm2d `body.1` (main.py:6)') || !m.includes('16 bias parameters')) throw new Error(m);
          if (found[0].related[0]?.span.line !== 5) throw new Error('related location should point at the BatchNorm');
        },
      },
      {
        name: 'nested call in forward with norm_layer default and an explicit bias=True',
        code: `${H}from torch.nn import BatchNorm2d as BN\nclass M(nn.Module):\n    def __init__(self, norm_layer=BN):\n        super().__init__()\n        self.conv = nn.Conv2d(3, 8, kernel_size=3, bias=True)\n#                   ^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^ bias-before-norm\n        self.bn = norm_layer(8)\n    def forward(self, x):\n        return self.bn(self.conv(x))\n`,
        output: `${H}from torch.nn import BatchNorm2d as BN\nclass M(nn.Module):\n    def __init__(self, norm_layer=BN):\n        super().__init__()\n        self.conv = nn.Conv2d(3, 8, kernel_size=3, bias=False)\n        self.bn = norm_layer(8)\n    def forward(self, x):\n        return self.bn(self.conv(x))\n`,
      },
      {
        name: 'GroupNorm with one channel per group behaves like InstanceNorm',
        code: `import torch\nclass M(torch.nn.Module):\n    def __init__(self):\n        super().__init__()\n        self.conv = torch.nn.Conv2d(3, 4, 3)\n#                   ^^^^^^^^^^^^^^^^^^^^^^^^ bias-before-norm\n        self.gn = torch.nn.GroupNorm(4, 4)\n    def forward(self, x):\n        x = self.conv(x)\n        x = self.gn(x)\n        return x\n`,
        output: `import torch\nclass M(torch.nn.Module):\n    def __init__(self):\n        super().__init__()\n        self.conv = torch.nn.Conv2d(3, 4, 3, bias=False)\n        self.gn = torch.nn.GroupNorm(4, 4)\n    def forward(self, x):\n        x = self.conv(x)\n        x = self.gn(x)\n        return x\n`,
      },
    ],
  });
});
