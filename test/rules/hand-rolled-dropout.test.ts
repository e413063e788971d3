// Table test for hand-rolled-dropout: random masks in forward need the 1/(1-p) rescale and a training gate.
import { test } from 'vitest';
import rule from '../../rules/hand-rolled-dropout';
import { runRuleTable } from '../helpers/rule-tester';
import type { Rule } from '../../server/src/engine/rule';

const H = 'import torch\nimport torch.nn as nn\n';
const cls = (fwd: string, extra = '') => `${H}class M(nn.Module):\n    def __init__(self, p=0.1):\n        super().__init__()\n        self.p = p\n        self.conv = nn.Conv2d(8, 8, 3, padding=1)\n${extra}    def forward(self, x):\n${fwd}`;

test('hand-rolled-dropout', async () => {
  await runRuleTable(rule as unknown as Rule, {
    valid: [
      {
        name: 'zoneout: m * previous + (1 - m) * new keeps every unit from one side, nothing to rescale',
        code: cls('        h = self.conv(x)\n        if self.training:\n            mask = torch.bernoulli(torch.full_like(h, self.p))\n            h = mask * x + (1 - mask) * h\n        else:\n            h = self.p * x + (1 - self.p) * h\n        return h\n'),
      },
      {
        name: 'DropBlock rescales by the count of kept units (numel / sum) instead of 1/keep',
        code: cls('        if not self.training:\n            return x\n        mask = (torch.rand(x.shape[0], *x.shape[2:], device=x.device) < self.p).float()\n        block = 1 - torch.nn.functional.max_pool2d(mask[:, None], 3, 1, 1)\n        out = x * block\n        return out * block.numel() / block.sum()\n'),
      },
      {
        name: 'residual drop-path gated by self.training and rescaled by 1/keep',
        code: cls('        out = self.conv(x)\n        if self.training and self.p > 0.0:\n            keep = 1.0 - self.p\n            mask = torch.bernoulli(torch.full((out.shape[0], 1, 1, 1), keep, device=out.device))\n            out = out * mask / keep\n        return out + x\n'),
      },
      {
        name: 'early return in eval and in-place div_ of the mask (timm-style drop path)',
        code: cls('        if not self.training or self.p == 0.0:\n            return x\n        keep = 1 - self.p\n        shape = (x.shape[0],) + (1,) * (x.ndim - 1)\n        mask = x.new_empty(shape).bernoulli_(keep)\n        mask.div_(keep)\n        return self.conv(x * mask)\n'),
      },
      {
        name: 'module-level helper taking the training flag from forward',
        code: `${H}def drop_path(x, drop_prob: float = 0.0, training: bool = False):\n    if drop_prob == 0.0 or not training:\n        return x\n    keep_prob = 1 - drop_prob\n    random_tensor = keep_prob + torch.rand((x.shape[0], 1, 1, 1), dtype=x.dtype, device=x.device)\n    random_tensor = (random_tensor > 1.0).float()\n    return x.div(keep_prob) * random_tensor\nclass M(nn.Module):\n    def __init__(self):\n        super().__init__()\n        self.conv = nn.Conv2d(8, 8, 3, padding=1)\n    def forward(self, x):\n        return x + drop_path(self.conv(x), 0.1, self.training)\n`,
      },
      {
        name: 'helper method only called under if self.training, rescaled by a reciprocal',
        code: cls('        x = self.conv(x)\n        if self.training:\n            x = self._drop_channels(x)\n        return x\n', '    def _drop_channels(self, x):\n        keep = 1.0 - self.p\n        mask = (torch.rand(x.shape[0], x.shape[1], 1, 1, device=x.device) < keep).float()\n        return x * mask * (1.0 / keep)\n'),
      },
      {
        name: 'rescale factor kept on the module, gated by an early return',
        code: cls('        if not self.training:\n            return x\n        mask = (torch.rand_like(x) > self.p).float()\n        return x * mask * self.scale\n', '        self.scale = 1.0 / (1.0 - p)\n'),
      },
      {
        name: 'a padding mask passed in is not a random mask',
        code: cls('        return self.conv(x) * mask\n').replace('def forward(self, x):', 'def forward(self, x, mask=None):'),
      },
    ],
    invalid: [
      {
        name: 'a masked term added to an unmasked one is no complement mix',
        code: cls('        h = self.conv(x)\n        if self.training:\n            mask = torch.bernoulli(torch.full_like(h, self.p))\n            h = mask * x + h\n#               ^^^^^^^^ hand-rolled-dropout:noRescale\n        return h\n'),
      },
      {
        name: 'Keras SpatialDropout port: neither rescaled nor gated',
        code: cls('        mask = (torch.rand(x.shape[0], x.shape[1], 1, 1, device=x.device) > self.p).float()\n        return x * mask\n#              ^^^^^^^^ hand-rolled-dropout:neither\n'),
        verify(found) {
          if (!found[0].message.includes('in `M.forward`')) throw new Error(found[0].message);
          if (found[0].related[0]?.span.line !== 8) throw new Error('related location should be the mask operand');
        },
      },
      {
        name: 'gated but not rescaled',
        code: cls('        if self.training:\n            x = x * torch.bernoulli(torch.full_like(x, 1 - self.p))\n#               ^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^ hand-rolled-dropout:noRescale\n        return self.conv(x)\n'),
      },
      {
        name: 'rescaled but applied in eval too',
        code: cls('        keep = 1 - self.p\n        mask = (torch.rand_like(x) < keep).float()\n        return self.conv(x * mask / keep)\n#                        ^^^^^^^^ hand-rolled-dropout:notGated\n'),
      },
      {
        name: 'in-place multiply in a helper method forward calls',
        code: cls('        return self._noise(self.conv(x))\n', '    def _noise(self, h):\n        m = torch.rand_like(h) > 0.2\n        h *= m.float()\n#       ^^^^^^^^^^^^^^ hand-rolled-dropout:neither\n        return h\n'),
        verify(found) {
          if (!found[0].message.includes('in `M._noise`')) throw new Error(found[0].message);
        },
      },
    ],
  });
});
