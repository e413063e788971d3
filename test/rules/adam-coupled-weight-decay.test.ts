// Table test for adam-coupled-weight-decay: Adam with L2 in the gradient, and the decoupled forms that are fine.
import { test } from 'vitest';
import rule from '../../rules/adam-coupled-weight-decay';
import { runRuleTable } from '../helpers/rule-tester';
import type { Rule } from '../../server/src/engine/rule';

const H = 'import torch\nimport torch.nn as nn\nmodel = nn.Linear(8, 2)\n';

test('adam-coupled-weight-decay', async () => {
  await runRuleTable(rule as unknown as Rule, {
    valid: [
      { name: 'AdamW', code: `${H}opt = torch.optim.AdamW(model.parameters(), lr=1e-3, weight_decay=0.05)\n` },
      { name: 'Adam without weight decay', code: `${H}opt = torch.optim.Adam(model.parameters(), lr=1e-3)\n` },
      { name: 'Adam with weight_decay=0', code: `${H}opt = torch.optim.Adam(model.parameters(), lr=1e-3, weight_decay=0.0)\n` },
      { name: 'Adam with decoupled_weight_decay=True', code: `${H}opt = torch.optim.Adam(model.parameters(), lr=1e-3, weight_decay=1e-2, decoupled_weight_decay=True)\n` },
      { name: 'weight decay not known statically', code: `${H}def make(wd):\n    return torch.optim.Adam(model.parameters(), weight_decay=wd)\n` },
    ],
    invalid: [
      {
        name: 'torch.optim.Adam with weight_decay from a constant',
        code: `${H}WD = 1e-4\nopt = torch.optim.Adam(model.parameters(), lr=1e-3, weight_decay=WD)\n#     ^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^ adam-coupled-weight-decay:coupled\n`,
        fixKind: 'suggested',
        output: `${H}WD = 1e-4\nopt = torch.optim.AdamW(model.parameters(), lr=1e-3, weight_decay=WD)\n`,
        verify(found) {
          const m = found[0].message;
          if (!m.includes('weight_decay=0.0001') || !m.includes("AdamW's default is 1e-2") || !m.includes('Loshchilov & Hutter 2019')) throw new Error(m);
        },
      },
      {
        name: 'positional weight_decay on an imported Adam (no rename without the import)',
        code: `${H}from torch.optim import Adam\nopt = Adam(model.parameters(), 1e-3, (0.9, 0.999), 1e-8, 5e-4)\n#     ^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^ adam-coupled-weight-decay\n`,
      },
    ],
  });
});
