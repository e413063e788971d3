// Table test for functional-alpha-dropout-never-on: F.alpha_dropout without training= is the identity.
import { test } from 'vitest';
import rule from '../../rules/functional-alpha-dropout-never-on';
import { runRuleTable } from '../helpers/rule-tester';
import type { Rule } from '../../server/src/engine/rule';

const H = 'import torch\nimport torch.nn as nn\nimport torch.nn.functional as F\n';
const init = '    def __init__(self):\n        super().__init__()\n        self.fc = nn.Linear(8, 8)\n';

test('functional-alpha-dropout-never-on', async () => {
  await runRuleTable(rule as unknown as Rule, {
    valid: [
      {
        name: 'SELU MLP passing training=self.training',
        code: `${H}class M(nn.Module):\n${init}    def forward(self, x):\n        h = F.selu(self.fc(x))\n        return F.alpha_dropout(h, p=0.05, training=self.training)\n`,
      },
      {
        name: 'training as third positional argument of feature_alpha_dropout',
        code: `${H}class M(nn.Module):\n${init}    def forward(self, x):\n        return F.feature_alpha_dropout(self.fc(x), 0.1, self.training)\n`,
      },
      {
        name: 'plain F.dropout is another rule',
        code: `${H}class M(nn.Module):\n${init}    def forward(self, x):\n        return F.dropout(self.fc(x), 0.1)\n`,
      },
      {
        name: 'functional helper outside a module takes the flag from its caller',
        code: `${H}def selu_block(x, w, training):\n    return F.alpha_dropout(F.selu(x @ w), 0.1, training)\nclass M(nn.Module):\n${init}    def forward(self, x):\n        return self.fc(x)\n`,
      },
    ],
    invalid: [
      {
        name: 'alpha dropout after a concatenation of SELU towers',
        code: `${H}class M(nn.Module):\n${init}    def forward(self, x):\n        h = torch.cat([F.selu(self.fc(x)), x], dim=1)\n        h = F.alpha_dropout(h, p=0.1)\n#           ^^^^^^^^^^^^^^^^^^^^^^^^^ functional-alpha-dropout-never-on:neverOn\n        return h\n`,
        output: `${H}class M(nn.Module):\n${init}    def forward(self, x):\n        h = torch.cat([F.selu(self.fc(x)), x], dim=1)\n        h = F.alpha_dropout(h, p=0.1, training=self.training)\n        return h\n`,
        verify(found) {
          if (!found[0].message.includes('`F.alpha_dropout` in `M.forward`')) throw new Error(found[0].message);
        },
      },
      {
        name: 'feature alpha dropout through torch.nn.functional spelled out, in a method forward calls',
        code: `import torch\nclass M(torch.nn.Module):\n    def __init__(self):\n        super().__init__()\n        self.fc = torch.nn.Linear(4, 4)\n    def features(me, x):\n        return torch.nn.functional.feature_alpha_dropout(me.fc(x))\n#              ^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^ functional-alpha-dropout-never-on\n    def forward(self, x):\n        return self.features(x)\n`,
        output: `import torch\nclass M(torch.nn.Module):\n    def __init__(self):\n        super().__init__()\n        self.fc = torch.nn.Linear(4, 4)\n    def features(me, x):\n        return torch.nn.functional.feature_alpha_dropout(me.fc(x), training=me.training)\n    def forward(self, x):\n        return self.features(x)\n`,
      },
    ],
  });
});
