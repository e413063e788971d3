// Table test for functional-dropout-always-on: functional dropout in forward without training=, resolved by name.
import { test } from 'vitest';
import rule from '../../rules/functional-dropout-always-on';
import { runRuleTable } from '../helpers/rule-tester';
import type { Rule } from '../../server/src/engine/rule';

const H = 'import torch\nimport torch.nn as nn\nimport torch.nn.functional as F\n';
const init = '    def __init__(self):\n        super().__init__()\n        self.fc = nn.Linear(8, 8)\n';

test('functional-dropout-always-on', async () => {
  await runRuleTable(rule as unknown as Rule, {
    valid: [
      {
        name: 'training=self.training given (timm-style head)',
        code: `${H}class M(nn.Module):\n${init}        self.drop_rate = 0.2\n    def forward(self, x):\n        x = F.dropout(x, p=self.drop_rate, training=self.training)\n        return self.fc(x)\n`,
      },
      {
        name: 'training passed as the third positional argument',
        code: `${H}class M(nn.Module):\n${init}    def forward(self, x):\n        return self.fc(F.dropout(x, 0.1, self.training))\n`,
      },
      {
        name: 'standalone function outside any module, with an explicit training parameter',
        code: `${H}def noisy_features(x, p, training):\n    return F.dropout(x, p, training)\ndef jitter(x):\n    return F.dropout(x, 0.1)\nclass M(nn.Module):\n${init}    def forward(self, x):\n        return self.fc(x)\n`,
      },
      {
        name: 'a user function named dropout is not torch.nn.functional.dropout',
        code: `${H}def dropout(x, p=0.5):\n    return x\nclass M(nn.Module):\n${init}    def forward(self, x):\n        return self.fc(dropout(x, 0.3))\n`,
      },
      {
        name: 'Monte-Carlo method that forward never calls',
        code: `${H}class M(nn.Module):\n${init}    def forward(self, x):\n        return self.fc(x)\n    def mc_sample(self, x):\n        return self.fc(F.dropout(x, 0.5))\n`,
      },
      {
        name: 'keyword arguments forwarded with **kwargs may carry training',
        code: `${H}class M(nn.Module):\n${init}        self.drop_kw = dict(p=0.1, training=False)\n    def forward(self, x, **kw):\n        return self.fc(F.dropout(x, **kw))\n`,
      },
    ],
    invalid: [
      {
        name: 'F.dropout in forward with p only',
        code: `${H}class M(nn.Module):\n${init}    def forward(self, x):\n        x = F.dropout(x, p=0.2)\n#           ^^^^^^^^^^^^^^^^^^^ functional-dropout-always-on:alwaysOn\n        return self.fc(x)\n`,
        output: `${H}class M(nn.Module):\n${init}    def forward(self, x):\n        x = F.dropout(x, p=0.2, training=self.training)\n        return self.fc(x)\n`,
        verify(found) {
          const m = found[0].message;
          if (!m.includes('`F.dropout` in `M.forward`') || !m.includes('20% (p=0.2)')) throw new Error(m);
        },
      },
      {
        name: 'aliased functional module in a helper method called from forward',
        code: `import torch.nn as nn\nfrom torch.nn import functional as fn\nclass Head(nn.Module):\n    def __init__(self):\n        super().__init__()\n        self.conv = nn.Conv2d(8, 8, 1)\n    def _regularise(self, h):\n        return fn.dropout2d(h, 0.1,)\n#              ^^^^^^^^^^^^^^^^^^^^^ functional-dropout-always-on\n    def forward(self, x):\n        return self.conv(self._regularise(x))\n`,
        output: `import torch.nn as nn\nfrom torch.nn import functional as fn\nclass Head(nn.Module):\n    def __init__(self):\n        super().__init__()\n        self.conv = nn.Conv2d(8, 8, 1)\n    def _regularise(self, h):\n        return fn.dropout2d(h, 0.1, training=self.training,)\n    def forward(self, x):\n        return self.conv(self._regularise(x))\n`,
      },
      {
        name: 'imported under another name, default p, in a submodule of the model',
        code: `import torch\nfrom torch.nn.functional import dropout as drop_fn\nclass Block(torch.nn.Module):\n    def __init__(self):\n        super().__init__()\n        self.fc = torch.nn.Linear(4, 4)\n    def forward(self, x):\n        return drop_fn(self.fc(x))\n#              ^^^^^^^^^^^^^^^^^^^ functional-dropout-always-on\nclass Net(torch.nn.Module):\n    def __init__(self):\n        super().__init__()\n        self.block = Block()\n    def forward(self, x):\n        return self.block(x)\n`,
        output: `import torch\nfrom torch.nn.functional import dropout as drop_fn\nclass Block(torch.nn.Module):\n    def __init__(self):\n        super().__init__()\n        self.fc = torch.nn.Linear(4, 4)\n    def forward(self, x):\n        return drop_fn(self.fc(x), training=self.training)\nclass Net(torch.nn.Module):\n    def __init__(self):\n        super().__init__()\n        self.block = Block()\n    def forward(self, x):\n        return self.block(x)\n`,
        verify(found) {
          if (found.length !== 1) throw new Error('one finding per call site, not one per model that reaches it');
          if (!found[0].message.includes('50% (p=0.5)')) throw new Error(found[0].message);
        },
      },
      {
        name: 'forward inherited from a base class in another file',
        code: {
          'base.py': 'import torch.nn as nn\nimport torch.nn.functional as F\nclass Base(nn.Module):\n    def forward(self, x):\n        return self.head(F.dropout(self.body(x), 0.1))\n#                        ^^^^^^^^^^^^^^^^^^^^^^^^^^^^ functional-dropout-always-on\n',
          'main.py': 'import torch.nn as nn\nfrom base import Base\nclass Net(Base):\n    def __init__(self):\n        super().__init__()\n        self.body = nn.Linear(4, 4)\n        self.head = nn.Linear(4, 2)\n',
        },
        output: 'import torch.nn as nn\nimport torch.nn.functional as F\nclass Base(nn.Module):\n    def forward(self, x):\n        return self.head(F.dropout(self.body(x), 0.1, training=self.training))\n',
      },
    ],
  });
});
