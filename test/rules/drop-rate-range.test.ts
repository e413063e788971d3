// Table test for drop-rate-range: rates PyTorch rejects (error) and rates that read as keep probabilities (warning).
import { test } from 'vitest';
import rule from '../../rules/drop-rate-range';
import { runRuleTable } from '../helpers/rule-tester';
import type { Rule } from '../../server/src/engine/rule';
import type { Finding } from '../../server/src/engine/types';

const H = 'import torch\nimport torch.nn as nn\nimport torch.nn.functional as F\n';

function expectLevel(found: Finding[], level: string): void {
  for (const f of found) if (f.level !== level) throw new Error(`${f.message}: level ${f.level}, expected ${level}`);
}

test('drop-rate-range', async () => {
  await runRuleTable(rule as unknown as Rule, {
    valid: [
      {
        name: 'ordinary rates in layers and functional calls',
        code: `${H}class M(nn.Module):\n    def __init__(self):\n        super().__init__()\n        self.body = nn.Sequential(nn.Linear(8, 8), nn.ReLU(), nn.Dropout(0.3))\n        self.rnn = nn.LSTM(8, 8, num_layers=2, dropout=0.5)\n    def forward(self, x):\n        return F.dropout(self.body(x), p=0.1, training=self.training)\n`,
      },
      {
        name: 'rate passed in by the caller is not constant',
        code: `${H}class M(nn.Module):\n    def __init__(self, p, rnn_dropout):\n        super().__init__()\n        self.drop = nn.Dropout(p)\n        self.rnn = nn.GRU(8, 8, num_layers=2, dropout=rnn_dropout)\n    def forward(self, x):\n        return self.drop(x)\n`,
      },
      {
        name: 'a high rate below a raised threshold',
        code: `${H}class M(nn.Module):\n    def __init__(self):\n        super().__init__()\n        self.drop = nn.Dropout(0.85)\n    def forward(self, x):\n        return self.drop(x)\n`,
        options: { thresholds: { suspiciousDropRate: 0.9 } },
      },
      {
        name: 'default rate and zero rate',
        code: `${H}class M(nn.Module):\n    def __init__(self):\n        super().__init__()\n        self.a = nn.Dropout()\n        self.b = nn.Dropout2d(p=0.0)\n    def forward(self, x):\n        return self.b(self.a(x))\n`,
      },
    ],
    invalid: [
      {
        name: 'TensorFlow 1 keep probability in a module-level constant',
        code: `${H}HEAD_KEEP = 0.9\nclass M(nn.Module):\n    def __init__(self):\n        super().__init__()\n        self.head_drop = nn.Dropout(HEAD_KEEP)\n#                                   ^^^^^^^^^ drop-rate-range:keepProbability\n    def forward(self, x):\n        return self.head_drop(x)\n`,
        verify(found) {
          expectLevel(found, 'warning');
          const want = 'Dropout `head_drop`: p=0.9 zeroes 90% of activations in training; if 0.9 was meant as the keep probability (Srivastava et al. 2014 use the retention probability), pass p=0.1.';
          if (found[0].message !== want) throw new Error(found[0].message);
          if (found[0].related[0]?.span.line !== 3) throw new Error('related location should point at HEAD_KEEP = 0.9');
        },
      },
      {
        name: 'percentage typed as a rate in a Sequential',
        code: `${H}class M(nn.Module):\n    def __init__(self):\n        super().__init__()\n        self.net = nn.Sequential(nn.Linear(4, 8), nn.SELU(), nn.AlphaDropout(5))\n#                                                                            ^ drop-rate-range:outOfRange\n    def forward(self, x):\n        return self.net(x)\n`,
        verify(found) {
          expectLevel(found, 'error');
          const want = 'AlphaDropout `net.2`: p=5 is outside [0, 1], so AlphaDropout raises ValueError (at construction). If 5% was meant, pass p=0.05.';
          if (found[0].message !== want) throw new Error(found[0].message);
        },
      },
      {
        name: 'negative rate and functional rate above one',
        code: `${H}class M(nn.Module):\n    def __init__(self):\n        super().__init__()\n        self.drop = nn.Dropout2d(p=-0.1)\n#                                  ^^^^ drop-rate-range:outOfRange\n    def forward(self, x):\n        x = self.drop(x)\n        return F.dropout(x, p=1.5, training=self.training)\n#                             ^^^ drop-rate-range:outOfRange\n`,
        verify(found) {
          expectLevel(found, 'error');
          if (!found.some((f) => f.message === '`F.dropout`: p=1.5 is outside [0, 1], so F.dropout raises ValueError (at the first forward call).')) throw new Error(found.map((f) => f.message).join('\n'));
        },
      },
      {
        name: 'LSTM dropout as a keep probability',
        code: `${H}class M(nn.Module):\n    def __init__(self):\n        super().__init__()\n        self.rnn = nn.LSTM(8, 16, num_layers=2, dropout=0.8)\n#                                                       ^^^ drop-rate-range:keepProbability\n    def forward(self, x):\n        return self.rnn(x)[0]\n`,
        verify(found) {
          expectLevel(found, 'warning');
          if (!found[0].message.includes('dropout=0.8 zeroes 80% of the outputs passed between stacked layers') || !found[0].message.includes('pass dropout=0.2')) throw new Error(found[0].message);
        },
      },
    ],
  });
});
