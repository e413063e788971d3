// Table test for alpha-dropout-without-selu: quiet next to any SELU or when activations are unknown; flagged in ReLU nets.
import { expect, test } from 'vitest';
import rule from '../../rules/alpha-dropout-without-selu';
import { runRuleTable } from '../helpers/rule-tester';
import type { Rule } from '../../server/src/engine/rule';

const H = 'import torch\nimport torch.nn as nn\nimport torch.nn.functional as F\n';

test('alpha-dropout-without-selu', async () => {
  await runRuleTable(rule as unknown as Rule, {
    valid: [
      {
        name: 'AlphaDropout next to nn.SELU in a Sequential',
        code: `${H}class M(nn.Module):\n    def __init__(self):\n        super().__init__()\n        self.net = nn.Sequential(nn.Linear(8, 32), nn.SELU(), nn.AlphaDropout(0.05), nn.Linear(32, 2))\n    def forward(self, x):\n        return self.net(x)\n`,
      },
      {
        name: 'AlphaDropout with functional F.selu in forward',
        code: `${H}class M(nn.Module):\n    def __init__(self):\n        super().__init__()\n        self.fc = nn.Linear(8, 32)\n        self.drop = nn.AlphaDropout(0.1)\n        self.out = nn.Linear(32, 2)\n    def forward(self, x):\n        return self.out(self.drop(F.selu(self.fc(x))))\n`,
      },
      {
        name: 'a mixed network with SELU somewhere stays quiet',
        code: `${H}class M(nn.Module):\n    def __init__(self):\n        super().__init__()\n        self.stem = nn.Sequential(nn.Linear(8, 32), nn.ReLU())\n        self.head = nn.Sequential(nn.Linear(32, 32), nn.SELU(), nn.AlphaDropout(0.1), nn.Linear(32, 2))\n    def forward(self, x):\n        return self.head(self.stem(x))\n`,
      },
      {
        name: 'activation from an unknown library layer: cannot tell',
        code: `${H}from fancy_layers import SmartAct\nclass M(nn.Module):\n    def __init__(self):\n        super().__init__()\n        self.fc = nn.Linear(8, 32)\n        self.act = SmartAct()\n        self.relu = nn.ReLU()\n        self.drop = nn.AlphaDropout(0.1)\n    def forward(self, x):\n        return self.drop(self.relu(self.act(self.fc(x))))\n`,
      },
    ],
    invalid: [
      {
        name: 'AlphaDropout after LayerNorm and F.relu',
        code: `${H}class M(nn.Module):\n    def __init__(self):\n        super().__init__()\n        self.fc = nn.Linear(8, 256)\n        self.norm = nn.LayerNorm(256)\n        self.drop = nn.AlphaDropout(0.1)\n#                   ^^^^^^^^^^^^^^^^^^^^ alpha-dropout-without-selu:layer\n        self.out = nn.Linear(256, 3)\n    def forward(self, x):\n        x = F.relu(self.norm(self.fc(x)))\n        return self.out(self.drop(x))\n`,
        fixKind: 'suggested',
        output: `${H}class M(nn.Module):\n    def __init__(self):\n        super().__init__()\n        self.fc = nn.Linear(8, 256)\n        self.norm = nn.LayerNorm(256)\n        self.drop = nn.Dropout(0.1)\n        self.out = nn.Linear(256, 3)\n    def forward(self, x):\n        x = F.relu(self.norm(self.fc(x)))\n        return self.out(self.drop(x))\n`,
        verify(found) {
          expect(found[0].message).toContain('AlphaDropout `drop` (p=0.1) sits in `M`, whose activations are ReLU-family only (F.relu at main.py:12)');
          expect(found[0].fixes[0].kind).toBe('suggested');
        },
      },
      {
        name: 'FeatureAlphaDropout after a 2-D conv and nn.ReLU becomes Dropout2d',
        code: `${H}class M(nn.Module):\n    def __init__(self):\n        super().__init__()\n        self.body = nn.Sequential(nn.Conv2d(3, 8, 3), nn.ReLU(), nn.FeatureAlphaDropout(p=0.2))\n#                                                                ^^^^^^^^^^^^^^^^^^^^^^^^^^^^^ alpha-dropout-without-selu:layer\n    def forward(self, x):\n        return self.body(x)\n`,
        fixKind: 'suggested',
        output: `${H}class M(nn.Module):\n    def __init__(self):\n        super().__init__()\n        self.body = nn.Sequential(nn.Conv2d(3, 8, 3), nn.ReLU(), nn.Dropout2d(p=0.2))\n    def forward(self, x):\n        return self.body(x)\n`,
      },
      {
        name: 'F.alpha_dropout with training= in a ReLU MLP',
        code: `${H}class M(nn.Module):\n    def __init__(self):\n        super().__init__()\n        self.fc = nn.Linear(8, 8)\n    def forward(self, x):\n        return F.alpha_dropout(torch.relu(self.fc(x)), 0.1, self.training)\n#              ^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^ alpha-dropout-without-selu:functional\n`,
        fixKind: 'suggested',
        output: `${H}class M(nn.Module):\n    def __init__(self):\n        super().__init__()\n        self.fc = nn.Linear(8, 8)\n    def forward(self, x):\n        return F.dropout(torch.relu(self.fc(x)), 0.1, self.training)\n`,
      },
      {
        name: 'F.alpha_dropout without training=: reported, no rename (the defaults differ)',
        code: `${H}class M(nn.Module):\n    def __init__(self):\n        super().__init__()\n        self.fc = nn.Linear(8, 8)\n    def forward(self, x):\n        return F.alpha_dropout(F.relu(self.fc(x)), 0.1)\n#              ^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^ alpha-dropout-without-selu:functional\n`,
        fixKind: 'suggested',
        verify(found) {
          expect(found[0].fixes).toEqual([]);
        },
      },
    ],
  });
});
