// Table test for selu-init: init calls found in __init__ loops, apply() callbacks and helpers in other files.
import { expect, test } from 'vitest';
import rule from '../../rules/selu-init';
import { runRuleTable } from '../helpers/rule-tester';
import type { Rule } from '../../server/src/engine/rule';

const H = 'import math\nimport torch.nn as nn\n';
const SELU_NET = (init: string) => `${H}class M(nn.Module):\n    def __init__(self):\n        super().__init__()\n        self.net = nn.Sequential(nn.Linear(8, 64), nn.SELU(), nn.Linear(64, 2))\n${init}    def forward(self, x):\n        return self.net(x)\n`;

test('selu-init', async () => {
  await runRuleTable(rule as unknown as Rule, {
    valid: [
      {
        name: "apply() with kaiming_normal_(nonlinearity='linear'), the LeCun normal idiom",
        code: `${H}def lecun_normal_(m):\n    if isinstance(m, nn.Linear):\n        nn.init.kaiming_normal_(m.weight, mode="fan_in", nonlinearity="linear")\n        nn.init.zeros_(m.bias)\nclass M(nn.Module):\n    def __init__(self):\n        super().__init__()\n        self.net = nn.Sequential(nn.Linear(8, 64), nn.SELU(), nn.Linear(64, 2))\n        self.apply(lecun_normal_)\n    def forward(self, x):\n        return self.net(x)\n`,
      },
      {
        name: 'ReLU network with the ReLU gain',
        code: `${H}class M(nn.Module):\n    def __init__(self):\n        super().__init__()\n        self.net = nn.Sequential(nn.Linear(8, 64), nn.ReLU(), nn.Linear(64, 2))\n        for m in self.modules():\n            if isinstance(m, nn.Linear):\n                nn.init.kaiming_normal_(m.weight, nonlinearity='relu')\n    def forward(self, x):\n        return self.net(x)\n`,
      },
      {
        name: 'normal_ with std = 1/sqrt(fan_in) in an init loop',
        code: SELU_NET(`        for m in self.modules():\n            if isinstance(m, nn.Linear):\n                nn.init.normal_(m.weight, std=1 / math.sqrt(m.in_features))\n`),
      },
      {
        name: 'a later LeCun re-initialisation wins over the kaiming call',
        code: SELU_NET(`        for m in self.modules():\n            if isinstance(m, nn.Linear):\n                nn.init.kaiming_normal_(m.weight, nonlinearity='relu')\n                m.weight.data.normal_(0.0, 1 / math.sqrt(m.in_features))\n`),
      },
      {
        name: 'isinstance picks only the conv layers, which sit outside the SELU network',
        code: `${H}class M(nn.Module):\n    def __init__(self):\n        super().__init__()\n        self.net = nn.Sequential(nn.Linear(8, 64), nn.SELU(), nn.Linear(64, 2))\n        for m in self.modules():\n            if isinstance(m, nn.Conv2d):\n                nn.init.kaiming_normal_(m.weight, nonlinearity='relu')\n    def forward(self, x):\n        return self.net(x)\n`,
      },
    ],
    invalid: [
      {
        name: 'init loop over self.modules() with the ReLU gain',
        code: SELU_NET(`        for m in self.modules():\n            if isinstance(m, nn.Linear):\n                nn.init.kaiming_normal_(m.weight, nonlinearity="relu")\n#               ^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^ selu-init:kaiming\n                nn.init.zeros_(m.bias)\n`),
        fixKind: 'suggested',
        output: SELU_NET(`        for m in self.modules():\n            if isinstance(m, nn.Linear):\n                nn.init.kaiming_normal_(m.weight, nonlinearity="linear")\n                nn.init.zeros_(m.bias)\n`),
        verify(found) {
          expect(found[0].message).toBe("`nn.init.kaiming_normal_` with nonlinearity='relu' initialises 2 layers (Linear `net.0`, Linear `net.2`) of the SELU network `M` (SELU `net.1`) with gain sqrt(2), i.e. std sqrt(2)/sqrt(fan_in). Self-normalisation assumes LeCun normal weights (std 1/sqrt(fan_in)), which kaiming_* gives with nonlinearity='linear' (gain 1); the nn.SELU documentation asks for 'linear' rather than 'selu'.");
        },
      },
      {
        name: 'kaiming_uniform_ with the default leaky_relu in an apply() callback from another file',
        code: {
          'main.py': `import torch.nn as nn\nimport torch.nn.functional as F\nfrom inits import init_weights\nclass M(nn.Module):\n    def __init__(self):\n        super().__init__()\n        self.fc1 = nn.Linear(8, 16)\n        self.fc2 = nn.Linear(16, 2)\n        self.apply(init_weights)\n    def forward(self, x):\n        return self.fc2(F.selu(self.fc1(x)))\n`,
          'inits.py': `from torch import nn\ndef init_weights(m):\n    if type(m) == nn.Linear or isinstance(m, nn.Linear):\n        nn.init.kaiming_uniform_(m.weight)\n#       ^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^ selu-init:kaiming\n`,
        },
        fixKind: 'suggested',
        output: `from torch import nn\ndef init_weights(m):\n    if type(m) == nn.Linear or isinstance(m, nn.Linear):\n        nn.init.kaiming_uniform_(m.weight, nonlinearity='linear')\n`,
        verify(found) {
          expect(found[0].message).toContain("with nonlinearity='leaky_relu' (the default) initialises 2 layers (Linear `fc1`, Linear `fc2`) of the SELU network `M` (F.selu at main.py:11)");
        },
      },
      {
        name: "positional nonlinearity='selu' on one layer",
        code: `${H}class M(nn.Module):\n    def __init__(self):\n        super().__init__()\n        self.fc = nn.Linear(8, 8)\n        self.act = nn.SELU()\n        nn.init.kaiming_normal_(self.fc.weight, 0, 'fan_in', 'selu')\n#       ^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^ selu-init:kaiming\n    def forward(self, x):\n        return self.act(self.fc(x))\n`,
        fixKind: 'suggested',
        output: `${H}class M(nn.Module):\n    def __init__(self):\n        super().__init__()\n        self.fc = nn.Linear(8, 8)\n        self.act = nn.SELU()\n        nn.init.kaiming_normal_(self.fc.weight, 0, 'fan_in', 'linear')\n    def forward(self, x):\n        return self.act(self.fc(x))\n`,
        verify(found) {
          expect(found[0].message).toContain("nonlinearity='selu' initialises Linear `fc` of the SELU network `M` (SELU `act`) with gain 0.75, i.e. std 0.75/sqrt(fan_in)");
        },
      },
    ],
  });
});
