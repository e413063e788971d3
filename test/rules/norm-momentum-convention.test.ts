// Table test for norm-momentum-convention: Keras-style momenta in PyTorch norms, with the literal rewritten as 1 - m.
import { expect, test } from 'vitest';
import rule from '../../rules/norm-momentum-convention';
import { runRuleTable } from '../helpers/rule-tester';
import type { Rule } from '../../server/src/engine/rule';

const H = 'import functools\nimport torch.nn as nn\n';

test('norm-momentum-convention', async () => {
  await runRuleTable(rule as unknown as Rule, {
    valid: [
      {
        name: 'PyTorch-style momentum through functools.partial and a norm_layer parameter',
        code: `${H}BN_MOMENTUM = 0.05\nclass Block(nn.Module):\n    def __init__(self, c=16, norm_layer=None):\n        super().__init__()\n        if norm_layer is None:\n            norm_layer = nn.BatchNorm2d\n        self.conv = nn.Conv2d(c, c, 3, bias=False)\n        self.bn = norm_layer(c)\n    def forward(self, x):\n        return self.bn(self.conv(x))\nclass Net(nn.Module):\n    def __init__(self):\n        super().__init__()\n        self.b = Block(16, norm_layer=functools.partial(nn.BatchNorm2d, momentum=BN_MOMENTUM))\n    def forward(self, x):\n        return self.b(x)\n`,
      },
      {
        name: 'momentum 0.5 weighs batch and average equally in both conventions',
        code: `${H}class M(nn.Module):\n    def __init__(self):\n        super().__init__()\n        self.bn = nn.BatchNorm2d(8, momentum=0.5)\n    def forward(self, x):\n        return self.bn(x)\n`,
      },
      {
        name: 'an init loop resets the momentum of every BatchNorm to a PyTorch value',
        code: `${H}class M(nn.Module):\n    def __init__(self):\n        super().__init__()\n        self.bn = nn.BatchNorm2d(8, momentum=0.99)\n        for m in self.modules():\n            if isinstance(m, nn.BatchNorm2d):\n                m.momentum = 0.01\n    def forward(self, x):\n        return self.bn(x)\n`,
      },
      {
        name: 'momentum=None is a cumulative average',
        code: `${H}class M(nn.Module):\n    def __init__(self):\n        super().__init__()\n        self.bn = nn.BatchNorm1d(32, momentum=None)\n    def forward(self, x):\n        return self.bn(x)\n`,
      },
      {
        name: 'InstanceNorm without running statistics never uses its momentum',
        code: `${H}class M(nn.Module):\n    def __init__(self):\n        super().__init__()\n        self.norm = nn.InstanceNorm2d(16, momentum=0.9)\n    def forward(self, x):\n        return self.norm(x)\n`,
      },
      {
        name: 'momentum from a constructor argument with no default is unknown',
        code: `${H}class M(nn.Module):\n    def __init__(self, bn_momentum):\n        super().__init__()\n        self.bn = nn.BatchNorm2d(16, momentum=bn_momentum)\n    def forward(self, x):\n        return self.bn(x)\n`,
      },
    ],
    invalid: [
      {
        name: 'Keras momentum copied into a helper-built Sequential',
        code: `${H}def conv_block(c_in, c_out):\n    return nn.Sequential(\n        nn.Conv2d(c_in, c_out, 3, padding=1),\n        nn.BatchNorm2d(c_out, momentum=0.99, eps=1e-3),\n#       ^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^ norm-momentum-convention:convention\n        nn.ReLU(),\n    )\nclass M(nn.Module):\n    def __init__(self):\n        super().__init__()\n        self.blocks = nn.ModuleList([conv_block(3, 24), conv_block(24, 48)])\n    def forward(self, x):\n        for b in self.blocks:\n            x = b(x)\n        return x\n`,
        output: `${H}def conv_block(c_in, c_out):\n    return nn.Sequential(\n        nn.Conv2d(c_in, c_out, 3, padding=1),\n        nn.BatchNorm2d(c_out, momentum=0.01, eps=1e-3),\n        nn.ReLU(),\n    )\nclass M(nn.Module):\n    def __init__(self):\n        super().__init__()\n        self.blocks = nn.ModuleList([conv_block(3, 24), conv_block(24, 48)])\n    def forward(self, x):\n        for b in self.blocks:\n            x = b(x)\n        return x\n`,
        verify(found) {
          expect(found).toHaveLength(1);
          expect(found[0].message).toBe('BatchNorm2d `blocks.0.1` has momentum=0.99. In PyTorch momentum is the weight of each new batch (running = (1 - m) * running + m * batch), so every batch contributes 99% and the running statistics follow the last few batches. Read the Keras/Flax way (moving = m * moving + (1 - m) * batch) it would keep 99% of the old average; that meaning is momentum=0.01 in PyTorch.');
        },
      },
      {
        name: 'a module constant passed through functools.partial: reported at the norm, fixed at the constant',
        code: `${H}BN_MOMENTUM = 0.9\nclass Block(nn.Module):\n    def __init__(self, c=16, norm_layer=nn.BatchNorm2d):\n        super().__init__()\n        self.conv = nn.Conv2d(c, c, 3, bias=False)\n        self.bn = norm_layer(c)\n#                 ^^^^^^^^^^^^^ norm-momentum-convention\n    def forward(self, x):\n        return self.bn(self.conv(x))\nclass Net(nn.Module):\n    def __init__(self):\n        super().__init__()\n        self.b = Block(16, norm_layer=functools.partial(nn.BatchNorm2d, momentum=BN_MOMENTUM))\n    def forward(self, x):\n        return self.b(x)\n`,
        output: `${H}BN_MOMENTUM = 0.1\nclass Block(nn.Module):\n    def __init__(self, c=16, norm_layer=nn.BatchNorm2d):\n        super().__init__()\n        self.conv = nn.Conv2d(c, c, 3, bias=False)\n        self.bn = norm_layer(c)\n    def forward(self, x):\n        return self.bn(self.conv(x))\nclass Net(nn.Module):\n    def __init__(self):\n        super().__init__()\n        self.b = Block(16, norm_layer=functools.partial(nn.BatchNorm2d, momentum=BN_MOMENTUM))\n    def forward(self, x):\n        return self.b(x)\n`,
        verify(found) {
          expect(found[0].message).toContain('BatchNorm2d `b.bn` has momentum=0.9 (set at main.py:3). In PyTorch');
          expect(found[0].message).toContain('every batch contributes 90%');
          expect(found[0].related[0].span.line).toBe(2);
        },
      },
      {
        name: 'momentum set in an init loop after construction',
        code: `${H}class M(nn.Module):\n    def __init__(self):\n        super().__init__()\n        self.bn = nn.BatchNorm1d(8)\n#                 ^^^^^^^^^^^^^^^^^ norm-momentum-convention\n        for m in self.modules():\n            if isinstance(m, nn.BatchNorm1d):\n                m.momentum = 0.9\n    def forward(self, x):\n        return self.bn(x)\n`,
        output: `${H}class M(nn.Module):\n    def __init__(self):\n        super().__init__()\n        self.bn = nn.BatchNorm1d(8)\n        for m in self.modules():\n            if isinstance(m, nn.BatchNorm1d):\n                m.momentum = 0.1\n    def forward(self, x):\n        return self.bn(x)\n`,
        verify(found) {
          expect(found[0].message).toContain('BatchNorm1d `bn` has momentum=0.9 (set at main.py:9).');
        },
      },
      {
        name: 'SyncBatchNorm with 0.997 and InstanceNorm tracking running stats',
        code: `${H}class M(nn.Module):\n    def __init__(self):\n        super().__init__()\n        self.bn = nn.SyncBatchNorm(64, momentum=0.997)\n#                 ^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^ norm-momentum-convention\n        self.inorm = nn.InstanceNorm2d(64, momentum=0.6, track_running_stats=True)\n#                    ^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^ norm-momentum-convention\n    def forward(self, x):\n        return self.inorm(self.bn(x))\n`,
        output: `${H}class M(nn.Module):\n    def __init__(self):\n        super().__init__()\n        self.bn = nn.SyncBatchNorm(64, momentum=0.003)\n        self.inorm = nn.InstanceNorm2d(64, momentum=0.4, track_running_stats=True)\n    def forward(self, x):\n        return self.inorm(self.bn(x))\n`,
      },
    ],
  });
});
