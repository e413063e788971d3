// Table test for frozen-norm-still-updating: frozen parts whose BatchNorm still trains, and the eval()/frozen-BN fixes.
import { test } from 'vitest';
import rule from '../../rules/frozen-norm-still-updating';
import { runRuleTable } from '../helpers/rule-tester';
import type { Rule } from '../../server/src/engine/rule';

const H = `import torch\nimport torch.nn as nn\nimport torch.nn.functional as F\n\n\nclass Net(nn.Module):\n    def __init__(self):\n        super().__init__()\n        self.backbone = nn.Sequential(nn.Conv2d(3, 8, 3, bias=False), nn.BatchNorm2d(8), nn.ReLU(), nn.AdaptiveAvgPool2d(1), nn.Flatten())\n        self.head = nn.Linear(8, 2)\n\n    def forward(self, x):\n        return self.head(self.backbone(x))\n\n\n`;
const STEP = `        opt.zero_grad()\n        F.cross_entropy(model(x), y).backward()\n        opt.step()\n`;
const STEP_IN_EPOCH = `            opt.zero_grad()\n            F.cross_entropy(model(x), y).backward()\n            opt.step()\n`;

test('frozen-norm-still-updating', async () => {
  await runRuleTable(rule as unknown as Rule, {
    valid: [
      {
        name: 'frozen part put back in eval after model.train()',
        code: `${H}def finetune(loader, epochs):\n    model = Net()\n    model.backbone.requires_grad_(False)\n    opt = torch.optim.SGD(model.head.parameters(), lr=0.01)\n    for epoch in range(epochs):\n        model.train()\n        model.backbone.eval()\n        for x, y in loader:\n${STEP_IN_EPOCH}`,
      },
      {
        name: 'frozen part has no BatchNorm',
        code: `${H}def finetune(loader):\n    model = Net()\n    model.head.requires_grad_(False)\n    opt = torch.optim.SGD(model.backbone.parameters(), lr=0.01)\n    model.train()\n    for x, y in loader:\n${STEP}`,
      },
      {
        name: 'frozen parts listed and put in eval inside the loop (DDP idiom)',
        code: `${H}def finetune(loader):\n    model = Net()\n    frozen = [model.backbone]\n    for part in frozen:\n        part.requires_grad_(False)\n    opt = torch.optim.SGD([p for p in model.parameters() if p.requires_grad], lr=0.01)\n    for x, y in loader:\n        model.train()\n        for part in frozen:\n            part.eval()\n        model.backbone.eval()\n${STEP}`,
      },
      {
        name: 'frozen backbone from torch.hub: its layers are not known',
        code: `${H}def finetune(loader):\n    backbone = torch.hub.load("some/repo", "encoder")\n    backbone.requires_grad_(False)\n    model = nn.Sequential(backbone, nn.Linear(8, 2))\n    opt = torch.optim.SGD(model[1].parameters(), lr=0.01)\n    model.train()\n    for x, y in loader:\n${STEP}`,
      },
      {
        name: 'requires_grad_(True) unfreezes',
        code: `${H}def finetune(loader):\n    model = Net()\n    model.backbone.requires_grad_(True)\n    opt = torch.optim.SGD(model.parameters(), lr=0.01)\n    model.train()\n    for x, y in loader:\n${STEP}`,
      },
    ],
    invalid: [
      {
        name: 'backbone frozen, whole model trained in train mode',
        code: `${H}def finetune(loader, epochs):\n    model = Net()\n    model.backbone.requires_grad_(False)\n#   ^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^ frozen-norm-still-updating:updating\n    opt = torch.optim.AdamW(model.head.parameters(), lr=3e-4)\n    for epoch in range(epochs):\n        model.train()\n        for x, y in loader:\n${STEP_IN_EPOCH}`,
        verify(found) {
          const m = found[0].message;
          if (!m.includes('`model.backbone` is frozen') || !m.includes('not the running statistics of its 1 BatchNorm layer, which keep drifting')) throw new Error(m);
        },
      },
      {
        name: 'parameters frozen one by one in a loop',
        code: `${H}def finetune(loader):\n    model = Net()\n    for p in model.backbone.parameters():\n#            ^^^^^^^^^^^^^^^^^^^^^^^^^^^ frozen-norm-still-updating\n        p.requires_grad = False\n    opt = torch.optim.SGD(model.head.parameters(), lr=0.01)\n    model.train()\n    for x, y in loader:\n${STEP}`,
      },
    ],
  });
});
