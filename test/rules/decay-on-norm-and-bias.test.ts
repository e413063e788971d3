// Table test for decay-on-norm-and-bias: decay on all parameters of a normalised model, and parameter groups.
import { test } from 'vitest';
import rule from '../../rules/decay-on-norm-and-bias';
import { runRuleTable } from '../helpers/rule-tester';
import type { Rule } from '../../server/src/engine/rule';

const H = 'import torch\nimport torch.nn as nn\n';
const BN = `${H}model = nn.Sequential(nn.Conv2d(3, 8, 3, bias=False), nn.BatchNorm2d(8), nn.ReLU(), nn.Flatten(), nn.LazyLinear(2))\n`;

test('decay-on-norm-and-bias', async () => {
  await runRuleTable(rule as unknown as Rule, {
    valid: [
      {
        name: 'parameter groups exempt biases and norm parameters',
        code: `${BN}decay = [p for n, p in model.named_parameters() if p.ndim > 1]\nno_decay = [p for n, p in model.named_parameters() if p.ndim <= 1]\nopt = torch.optim.SGD([{"params": decay, "weight_decay": 5e-4}, {"params": no_decay, "weight_decay": 0.0}], lr=0.1)\n`,
      },
      { name: 'model without norm layers', code: `${H}model = nn.Sequential(nn.Linear(8, 8), nn.ReLU(), nn.Linear(8, 2))\nopt = torch.optim.SGD(model.parameters(), lr=0.1, weight_decay=5e-4)\n` },
      { name: 'timm model: its layers are not known', code: `${H}import timm\nmodel = timm.create_model("resnet50", pretrained=False)\nopt = torch.optim.SGD(model.parameters(), lr=0.1, weight_decay=5e-4)\n` },
      { name: 'no weight decay', code: `${BN}opt = torch.optim.SGD(model.parameters(), lr=0.1, momentum=0.9)\n` },
      { name: 'BatchNorm without affine parameters', code: `${H}model = nn.Sequential(nn.Conv2d(3, 8, 3, bias=False), nn.BatchNorm2d(8, affine=False))\nopt = torch.optim.SGD(model.parameters(), lr=0.1, weight_decay=5e-4)\n` },
    ],
    invalid: [
      {
        name: 'SGD with weight decay on a BatchNorm model',
        code: `${BN}opt = torch.optim.SGD(model.parameters(), lr=0.1, weight_decay=5e-4)\n#     ^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^ decay-on-norm-and-bias:allParams\n`,
        verify(found) {
          const m = found[0].message;
          if (!m.includes('Weight decay 0.0005 applies') || !m.includes('its 1 normalization layer and every bias')) throw new Error(m);
        },
      },
      {
        name: "AdamW's default decay on a LayerNorm model",
        code: `${H}class Enc(nn.Module):\n    def __init__(self):\n        super().__init__()\n        self.proj = nn.Linear(16, 16)\n        self.norm = nn.LayerNorm(16)\n    def forward(self, x):\n        return self.norm(self.proj(x))\nenc = Enc()\nopt = torch.optim.AdamW(enc.parameters(), lr=3e-4)\n#     ^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^ decay-on-norm-and-bias\n`,
        verify(found) {
          if (!found[0].message.includes('Weight decay 0.01 (the AdamW default)')) throw new Error(found[0].message);
        },
      },
    ],
  });
});
