// Table test for rnn-dropout-one-layer: RNN dropout only acts between stacked layers.
import { test } from 'vitest';
import rule from '../../rules/rnn-dropout-one-layer';
import { runRuleTable } from '../helpers/rule-tester';
import type { Rule } from '../../server/src/engine/rule';

const H = 'import torch\nimport torch.nn as nn\n';
const cls = (init: string) => `${H}class M(nn.Module):\n    def __init__(self):\n        super().__init__()\n${init}    def forward(self, x):\n        return self.rnn(x)[0]\n`;

test('rnn-dropout-one-layer', async () => {
  await runRuleTable(rule as unknown as Rule, {
    valid: [
      { name: 'two stacked layers', code: cls('        self.rnn = nn.LSTM(6, 96, num_layers=2, batch_first=True, dropout=0.2)\n') },
      { name: 'one layer without RNN dropout, dropout after it', code: cls('        self.rnn = nn.GRU(6, 32, batch_first=True)\n        self.drop = nn.Dropout(0.2)\n') },
      { name: 'explicit zero dropout', code: cls('        self.rnn = nn.LSTM(6, 32, num_layers=1, dropout=0.0)\n') },
      {
        name: 'the usual guard: dropout only when stacked, layer count from the caller',
        code: `${H}class M(nn.Module):\n    def __init__(self, num_layers, dropout=0.3):\n        super().__init__()\n        self.rnn = nn.LSTM(6, 32, num_layers=num_layers, dropout=dropout if num_layers > 1 else 0.0)\n    def forward(self, x):\n        return self.rnn(x)[0]\n`,
      },
    ],
    invalid: [
      {
        name: 'one-layer LSTM with dropout as the last keyword',
        code: cls('        self.rnn = nn.LSTM(input_size=6, hidden_size=64, num_layers=1, batch_first=True, dropout=0.2)\n#                  ^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^ rnn-dropout-one-layer:oneLayer\n'),
        fixKind: 'suggested',
        output: cls('        self.rnn = nn.LSTM(input_size=6, hidden_size=64, num_layers=1, batch_first=True)\n'),
        verify(found) {
          const m = found[0].message;
          if (!m.startsWith('LSTM `rnn` has dropout=0.2 but num_layers=1:') || !m.includes('PyTorch warns')) throw new Error(m);
          if (found[0].fixes[0]?.kind !== 'suggested') throw new Error('the fix changes the model: suggested, not safe');
        },
      },
      {
        name: 'GRU with the default layer count, dropout before another keyword',
        code: cls('        self.rnn = nn.GRU(4, 8, dropout=0.3, batch_first=True)\n#                  ^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^ rnn-dropout-one-layer\n'),
        fixKind: 'suggested',
        output: cls('        self.rnn = nn.GRU(4, 8, batch_first=True)\n'),
      },
      {
        name: 'torch.nn.RNN spelled out with dropout as the only keyword',
        code: cls('        self.rnn = torch.nn.RNN(4, 8, 1, dropout=0.5)\n#                  ^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^ rnn-dropout-one-layer\n'),
        fixKind: 'suggested',
        output: cls('        self.rnn = torch.nn.RNN(4, 8, 1)\n'),
      },
    ],
  });
});
