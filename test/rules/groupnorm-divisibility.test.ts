// Table test for groupnorm-divisibility: indivisible channel counts, with the group count rewritten to a divisor.
import { expect, test } from 'vitest';
import rule, { groupsFor } from '../../rules/groupnorm-divisibility';
import { runRuleTable } from '../helpers/rule-tester';
import type { Rule } from '../../server/src/engine/rule';

const H = 'import torch.nn as nn\nimport torch.nn.functional as F\n';

test('groupsFor: 32 when it divides, else the largest divisor up to 32', () => {
  expect([groupsFor(64), groupsFor(48), groupsFor(96), groupsFor(40), groupsFor(7), groupsFor(30)]).toEqual([32, 24, 32, 20, 7, 30]);
});

test('groupnorm-divisibility', async () => {
  await runRuleTable(rule as unknown as Rule, {
    valid: [
      {
        name: '64 channels in 8 groups',
        code: `${H}class M(nn.Module):\n    def __init__(self, out_ch=64):\n        super().__init__()\n        self.conv = nn.Conv2d(128, out_ch, 3, padding=1)\n        self.gn = nn.GroupNorm(8, out_ch)\n    def forward(self, x):\n        return F.relu(self.gn(self.conv(x)))\n`,
      },
      {
        name: 'a norm_layer partial with 32 groups over 256 channels',
        code: `${H}import functools\nclass M(nn.Module):\n    def __init__(self, norm_layer=functools.partial(nn.GroupNorm, 32)):\n        super().__init__()\n        self.gn = norm_layer(256)\n    def forward(self, x):\n        return self.gn(x)\n`,
      },
      {
        name: 'channels from an unknown argument',
        code: `${H}class M(nn.Module):\n    def __init__(self, width):\n        super().__init__()\n        self.gn = nn.GroupNorm(32, width)\n    def forward(self, x):\n        return self.gn(x)\n`,
      },
      {
        name: 'GroupNorm(1, C) is LayerNorm-like and always divides',
        code: `${H}class M(nn.Module):\n    def __init__(self):\n        super().__init__()\n        self.gn = nn.GroupNorm(num_groups=1, num_channels=45)\n    def forward(self, x):\n        return self.gn(x)\n`,
      },
    ],
    invalid: [
      {
        name: '48 channels in 32 groups',
        code: `${H}class M(nn.Module):\n    def __init__(self):\n        super().__init__()\n        self.proj = nn.Conv2d(128, 48, kernel_size=1, bias=False)\n        self.gn = nn.GroupNorm(32, 48, affine=False)\n#                 ^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^ groupnorm-divisibility:indivisible\n    def forward(self, x):\n        return F.relu(self.gn(self.proj(x)))\n`,
        fixKind: 'suggested',
        output: `${H}class M(nn.Module):\n    def __init__(self):\n        super().__init__()\n        self.proj = nn.Conv2d(128, 48, kernel_size=1, bias=False)\n        self.gn = nn.GroupNorm(24, 48, affine=False)\n    def forward(self, x):\n        return F.relu(self.gn(self.proj(x)))\n`,
        verify(found) {
          expect(found[0].message).toBe('GroupNorm `gn` (main.py:7) splits num_channels=48 into num_groups=32, but 48 is not a multiple of 32: constructing it raises ValueError "num_channels must be divisible by num_groups". num_groups=24 divides 48.');
        },
      },
      {
        name: 'keyword arguments and a width from a parent, once per site',
        code: `${H}class Block(nn.Module):\n    def __init__(self, width=96):\n        super().__init__()\n        self.gn = nn.GroupNorm(num_groups=36, num_channels=width, eps=1e-6)\n#                 ^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^ groupnorm-divisibility\n    def forward(self, x):\n        return self.gn(x)\nclass Net(nn.Module):\n    def __init__(self):\n        super().__init__()\n        self.a = Block(96)\n        self.b = Block(72)\n    def forward(self, x):\n        return self.b(self.a(x))\n`,
        fixKind: 'suggested',
        output: `${H}class Block(nn.Module):\n    def __init__(self, width=96):\n        super().__init__()\n        self.gn = nn.GroupNorm(num_groups=24, num_channels=width, eps=1e-6)\n    def forward(self, x):\n        return self.gn(x)\nclass Net(nn.Module):\n    def __init__(self):\n        super().__init__()\n        self.a = Block(96)\n        self.b = Block(72)\n    def forward(self, x):\n        return self.b(self.a(x))\n`,
        verify(found) {
          expect(found).toHaveLength(1);
          expect(found[0].message).toContain('GroupNorm `gn` (main.py:6) splits num_channels=96 into num_groups=36');
          expect(found[0].message).toContain('num_groups=24 divides 96 and the 72 channels of the other instances built at this line.');
        },
      },
    ],
  });
});
