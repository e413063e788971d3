// Table test for selu-with-batchnorm: BatchNorm in SELU stacks; quiet for ReLU nets, mixed nets and LayerNorm.
import { expect, test } from 'vitest';
import rule from '../../rules/selu-with-batchnorm';
import { runRuleTable } from '../helpers/rule-tester';
import type { Rule } from '../../server/src/engine/rule';

const H = 'import torch.nn as nn\nimport torch.nn.functional as F\n';

test('selu-with-batchnorm', async () => {
  await runRuleTable(rule as unknown as Rule, {
    valid: [
      {
        name: 'BatchNorm in a ReLU network',
        code: `${H}class M(nn.Module):\n    def __init__(self):\n        super().__init__()\n        self.net = nn.Sequential(nn.Linear(8, 32, bias=False), nn.BatchNorm1d(32), nn.ReLU(), nn.Linear(32, 2))\n    def forward(self, x):\n        return self.net(x)\n`,
      },
      {
        name: 'SELU stack with AlphaDropout and no BatchNorm',
        code: `${H}class M(nn.Module):\n    def __init__(self):\n        super().__init__()\n        self.net = nn.Sequential(nn.Linear(8, 32), nn.SELU(), nn.AlphaDropout(0.05), nn.Linear(32, 2))\n    def forward(self, x):\n        return self.net(x)\n`,
      },
      {
        name: 'ReLU conv backbone with BatchNorm and a SELU head (not a self-normalising network)',
        code: `${H}class M(nn.Module):\n    def __init__(self):\n        super().__init__()\n        self.conv = nn.Conv2d(3, 16, 3, bias=False)\n        self.bn = nn.BatchNorm2d(16)\n        self.fc = nn.Linear(16, 16)\n    def forward(self, x):\n        x = F.relu(self.bn(self.conv(x)))\n        return F.selu(self.fc(x.mean((2, 3))))\n`,
      },
      {
        name: 'LayerNorm next to SELU is not batch statistics',
        code: `${H}class M(nn.Module):\n    def __init__(self):\n        super().__init__()\n        self.net = nn.Sequential(nn.Linear(8, 32), nn.LayerNorm(32), nn.SELU())\n    def forward(self, x):\n        return self.net(x)\n`,
      },
    ],
    invalid: [
      {
        name: 'input BatchNorm1d before F.selu',
        code: `${H}class M(nn.Module):\n    def __init__(self):\n        super().__init__()\n        self.fc1 = nn.Linear(12, 96, bias=False)\n        self.bn1 = nn.BatchNorm1d(96)\n#                  ^^^^^^^^^^^^^^^^^^ selu-with-batchnorm:batchnorm\n        self.fc2 = nn.Linear(96, 3)\n    def forward(self, x):\n        return self.fc2(F.selu(self.bn1(self.fc1(x))))\n`,
        verify(found) {
          expect(found[0].message).toContain('BatchNorm1d `bn1` (main.py:7) sits in the SELU network `M` (F.selu at main.py:10)');
        },
      },
      {
        name: 'BatchNorm built by a helper in another file, reported at the helper',
        code: {
          'main.py': `import torch.nn as nn\nfrom blocks import selu_bn_block\nclass M(nn.Module):\n    def __init__(self):\n        super().__init__()\n        self.body = nn.Sequential(selu_bn_block(8, 16), selu_bn_block(16, 16))\n    def forward(self, x):\n        return self.body(x)\n`,
          'blocks.py': `import torch.nn as nn\ndef selu_bn_block(i, o):\n    return nn.Sequential(nn.Linear(i, o), nn.BatchNorm1d(o), nn.SELU())\n#                                         ^^^^^^^^^^^^^^^^^ selu-with-batchnorm:batchnorm\n`,
        },
        verify(found) {
          expect(found).toHaveLength(1);
          expect(found[0].message).toContain('BatchNorm1d `body.0.1` (blocks.py:3) sits in the SELU network `M` (SELU `body.0.2`)');
        },
      },
    ],
  });
});
