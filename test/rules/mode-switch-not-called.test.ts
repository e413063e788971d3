// Table test for mode-switch-not-called: bare `model.eval` / `model.train` statements, and the calls that are fine.
import { test } from 'vitest';
import rule from '../../rules/mode-switch-not-called';
import { runRuleTable } from '../helpers/rule-tester';
import type { Rule } from '../../server/src/engine/rule';

const H = 'import torch\nimport torch.nn as nn\n';

test('mode-switch-not-called', async () => {
  await runRuleTable(rule as unknown as Rule, {
    valid: [
      { name: 'eval() called', code: `${H}model = nn.Linear(4, 2)\nmodel.eval()\n` },
      { name: 'method read into a name (a callback), not a statement', code: `${H}model = nn.Linear(4, 2)\nswitch = model.eval\nswitch()\n` },
      { name: 'train(False) called', code: `${H}def evaluate(model, x):\n    model.train(False)\n    with torch.no_grad():\n        return model(x)\n` },
      { name: 'method passed to a hook registry', code: `${H}hooks = []\nmodel = nn.Linear(4, 2)\nhooks.append(model.train)\n` },
    ],
    invalid: [
      {
        name: 'bare model.eval in an evaluation helper',
        code: `${H}def forecast(model, x):\n    model.eval\n#   ^^^^^^^^^^ mode-switch-not-called:notCalled\n    with torch.no_grad():\n        return model(x)\n`,
        output: `${H}def forecast(model, x):\n    model.eval()\n    with torch.no_grad():\n        return model(x)\n`,
        verify(found) {
          if (!found[0].message.includes('`model.eval` without parentheses')) throw new Error(found[0].message);
        },
      },
      {
        name: 'bare self.net.train in a method',
        code: `${H}class Runner:\n    def fit(self, batches):\n        self.net.train\n#       ^^^^^^^^^^^^^^ mode-switch-not-called\n        for x in batches:\n            self.net(x).sum().backward()\n`,
        output: `${H}class Runner:\n    def fit(self, batches):\n        self.net.train()\n        for x in batches:\n            self.net(x).sum().backward()\n`,
      },
    ],
  });
});
