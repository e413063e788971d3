// Table test for selu-plain-dropout: SELU networks with AlphaDropout stay quiet; plain dropout is swapped at the same rate.
import { expect, test } from 'vitest';
import rule from '../../rules/selu-plain-dropout';
import { runRuleTable } from '../helpers/rule-tester';
import type { Rule } from '../../server/src/engine/rule';

const H = 'import torch\nimport torch.nn as nn\nimport torch.nn.functional as F\n';

test('selu-plain-dropout', async () => {
  await runRuleTable(rule as unknown as Rule, {
    valid: [
      {
        name: 'SELU blocks built by a helper with AlphaDropout',
        code: `${H}def selu_block(i, o, rate):\n    return nn.Sequential(nn.Linear(i, o), nn.SELU(), nn.AlphaDropout(rate))\nclass M(nn.Module):\n    def __init__(self):\n        super().__init__()\n        self.blocks = nn.ModuleList([selu_block(8, 32, 0.05), selu_block(32, 32, 0.05)])\n        self.out = nn.Linear(32, 2)\n    def forward(self, x):\n        for b in self.blocks:\n            x = b(x)\n        return self.out(x)\n`,
      },
      {
        name: 'plain dropout in a ReLU network',
        code: `${H}class M(nn.Module):\n    def __init__(self):\n        super().__init__()\n        self.net = nn.Sequential(nn.Linear(8, 32), nn.ReLU(), nn.Dropout(0.5), nn.Linear(32, 2))\n    def forward(self, x):\n        return self.net(x)\n`,
      },
      {
        name: 'mixed network: ReLU conv backbone with a SELU head keeps ordinary dropout quiet',
        code: `${H}class M(nn.Module):\n    def __init__(self):\n        super().__init__()\n        self.conv = nn.Conv2d(3, 8, 3)\n        self.drop = nn.Dropout2d(0.1)\n        self.fc = nn.Linear(8, 8)\n    def forward(self, x):\n        x = self.drop(F.relu(self.conv(x)))\n        return F.selu(self.fc(x.mean((2, 3))))\n`,
      },
      {
        name: 'F.alpha_dropout with training=self.training next to F.selu',
        code: `${H}class M(nn.Module):\n    def __init__(self):\n        super().__init__()\n        self.fc = nn.Linear(8, 8)\n    def forward(self, x):\n        x = F.selu(self.fc(x))\n        return F.alpha_dropout(x, p=0.1, training=self.training)\n`,
      },
    ],
    invalid: [
      {
        name: 'nn.Dropout in a Sequential SELU stack',
        code: `${H}class M(nn.Module):\n    def __init__(self):\n        super().__init__()\n        self.net = nn.Sequential(\n            nn.Linear(8, 64),\n            nn.SELU(),\n            nn.Dropout(0.2),\n#           ^^^^^^^^^^^^^^^ selu-plain-dropout:layer\n            nn.Linear(64, 2),\n        )\n    def forward(self, x):\n        return self.net(x)\n`,
        output: `${H}class M(nn.Module):\n    def __init__(self):\n        super().__init__()\n        self.net = nn.Sequential(\n            nn.Linear(8, 64),\n            nn.SELU(),\n            nn.AlphaDropout(0.2),\n            nn.Linear(64, 2),\n        )\n    def forward(self, x):\n        return self.net(x)\n`,
        verify(found) {
          expect(found[0].message).toContain('Dropout `net.2` (p=0.2) is plain dropout in the SELU network `M` (SELU `net.1` at main.py:9)');
          expect(found[0].message).toContain('AlphaDropout(p=0.2)');
        },
      },
      {
        name: 'Dropout2d in a SELU conv net becomes FeatureAlphaDropout; torch.nn spelled out',
        code: `import torch\nclass M(torch.nn.Module):\n    def __init__(self):\n        super().__init__()\n        self.conv = torch.nn.Conv2d(3, 8, 3)\n        self.act = torch.nn.SELU()\n        self.drop = torch.nn.Dropout2d(p=0.1)\n#                   ^^^^^^^^^^^^^^^^^^^^^^^^^ selu-plain-dropout:layer\n    def forward(self, x):\n        return self.drop(self.act(self.conv(x)))\n`,
        output: `import torch\nclass M(torch.nn.Module):\n    def __init__(self):\n        super().__init__()\n        self.conv = torch.nn.Conv2d(3, 8, 3)\n        self.act = torch.nn.SELU()\n        self.drop = torch.nn.FeatureAlphaDropout(p=0.1)\n    def forward(self, x):\n        return self.drop(self.act(self.conv(x)))\n`,
      },
      {
        name: 'F.dropout without training= gets F.alpha_dropout with training=self.training',
        code: `${H}class M(nn.Module):\n    def __init__(self):\n        super().__init__()\n        self.fc1 = nn.Linear(8, 16)\n        self.fc2 = nn.Linear(16, 2)\n    def forward(self, x):\n        x = F.selu(self.fc1(x))\n        x = F.dropout(x, 0.1)\n#           ^^^^^^^^^^^^^^^^^ selu-plain-dropout:functional\n        return self.fc2(x)\n`,
        output: `${H}class M(nn.Module):\n    def __init__(self):\n        super().__init__()\n        self.fc1 = nn.Linear(8, 16)\n        self.fc2 = nn.Linear(16, 2)\n    def forward(self, x):\n        x = F.selu(self.fc1(x))\n        x = F.alpha_dropout(x, 0.1, training=self.training)\n        return self.fc2(x)\n`,
        verify(found) {
          expect(found[0].message).toContain('`F.dropout` in forward of the SELU network `M` (F.selu at main.py:10)');
        },
      },
      {
        name: 'F.dropout with training given keeps its arguments',
        code: `${H}class M(nn.Module):\n    def __init__(self):\n        super().__init__()\n        self.fc = nn.Sequential(nn.Linear(8, 16), nn.SELU())\n    def forward(self, x):\n        return F.dropout(self.fc(x), p=0.1, training=self.training)\n#              ^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^ selu-plain-dropout:functional\n`,
        output: `${H}class M(nn.Module):\n    def __init__(self):\n        super().__init__()\n        self.fc = nn.Sequential(nn.Linear(8, 16), nn.SELU())\n    def forward(self, x):\n        return F.alpha_dropout(self.fc(x), p=0.1, training=self.training)\n`,
      },
      {
        name: 'imported Dropout name: reported once per site across Block and Net, no rename without the import',
        code: `import torch.nn as nn\nfrom torch.nn import Dropout\nclass Block(nn.Module):\n    def __init__(self, d=16):\n        super().__init__()\n        self.fc = nn.Linear(d, d)\n        self.act = nn.SELU()\n        self.drop = Dropout(0.1)\n#                   ^^^^^^^^^^^^ selu-plain-dropout:layer\n    def forward(self, x):\n        return self.drop(self.act(self.fc(x)))\nclass Net(nn.Module):\n    def __init__(self):\n        super().__init__()\n        self.b1 = Block(16)\n        self.b2 = Block(16)\n    def forward(self, x):\n        return self.b2(self.b1(x))\n`,
        verify(found) {
          expect(found).toHaveLength(1);
          expect(found[0].message).toContain('Dropout `drop` (p=0.1) is plain dropout in the SELU network `Block`');
          expect(found[0].fixes).toEqual([]);
        },
      },
    ],
  });
});
