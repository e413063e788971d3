// Table test for train-mode-not-restored: eval() inside a training loop that the next pass does not undo.
import { test } from 'vitest';
import rule from '../../rules/train-mode-not-restored';
import { runRuleTable } from '../helpers/rule-tester';
import type { Rule } from '../../server/src/engine/rule';

const H = 'import torch\nimport torch.nn as nn\nimport torch.nn.functional as F\n';
const NET = `class Net(nn.Module):\n    def __init__(self):\n        super().__init__()\n        self.fc = nn.Linear(8, 8)\n        self.drop = nn.Dropout(0.5)\n        self.out = nn.Linear(8, 2)\n    def forward(self, x):\n        return self.out(self.drop(self.fc(x)))\n`;
const M = `${H}${NET}`;
const VALIDATE = `def validate(model, loader):\n    model.eval()\n    with torch.no_grad():\n        return sum(F.cross_entropy(model(x), y).item() for x, y in loader)\n`;

test('train-mode-not-restored', async () => {
  await runRuleTable(rule as unknown as Rule, {
    valid: [
      {
        name: 'model.train() heads the epoch loop body',
        code: `${M}${VALIDATE}def fit(model, opt, train_loader, val_loader, epochs):\n    for epoch in range(epochs):\n        model.train()\n        for x, y in train_loader:\n            opt.zero_grad()\n            F.cross_entropy(model(x), y).backward()\n            opt.step()\n        validate(model, val_loader)\n`,
      },
      {
        name: 'the per-epoch training function switches to train itself',
        code: `${M}${VALIDATE}def train_one_epoch(model, opt, loader):\n    model.train()\n    for x, y in loader:\n        opt.zero_grad()\n        F.cross_entropy(model(x), y).backward()\n        opt.step()\ndef fit(model, opt, train_loader, val_loader, epochs):\n    for epoch in range(epochs):\n        train_one_epoch(model, opt, train_loader)\n        validate(model, val_loader)\n`,
      },
      {
        name: 'validation restores the mode it found',
        code: `${M}def validate(model, loader):\n    was_training = model.training\n    model.eval()\n    with torch.no_grad():\n        loss = sum(F.cross_entropy(model(x), y).item() for x, y in loader)\n    model.train(was_training)\n    return loss\ndef fit(model, opt, train_loader, val_loader, epochs):\n    model.train()\n    for epoch in range(epochs):\n        for x, y in train_loader:\n            opt.zero_grad()\n            F.cross_entropy(model(x), y).backward()\n            opt.step()\n        validate(model, val_loader)\n`,
      },
      {
        name: 'a teacher kept in eval on every pass is deliberate',
        code: `${M}def distil(student, teacher, opt, loader):\n    student.train()\n    for x, y in loader:\n        teacher.eval()\n        opt.zero_grad()\n        loss = F.mse_loss(student(x), teacher(x).detach())\n        loss.backward()\n        opt.step()\n`,
      },
    ],
    invalid: [
      {
        name: 'validate() in the epoch loop leaves eval mode for the next epoch',
        code: `${M}def validate(model, loader):\n    model.eval()\n#   ^^^^^^^^^^^^ train-mode-not-restored:notRestored\n    with torch.no_grad():\n        return sum(F.cross_entropy(model(x), y).item() for x, y in loader)\ndef fit(model, opt, train_loader, val_loader, epochs):\n    model.train()\n    for epoch in range(epochs):\n        for x, y in train_loader:\n            opt.zero_grad()\n            F.cross_entropy(model(x), y).backward()\n            opt.step()\n        validate(model, val_loader)\n`,
        output: `${M}def validate(model, loader):\n    model.eval()\n    with torch.no_grad():\n        return sum(F.cross_entropy(model(x), y).item() for x, y in loader)\ndef fit(model, opt, train_loader, val_loader, epochs):\n    model.train()\n    for epoch in range(epochs):\n        model.train()\n        for x, y in train_loader:\n            opt.zero_grad()\n            F.cross_entropy(model(x), y).backward()\n            opt.step()\n        validate(model, val_loader)\n`,
        verify(found) {
          const m = found[0].message;
          if (!m.includes('in validate() (main.py:13)') || !m.includes('the loop at main.py:18')) throw new Error(m);
        },
      },
      {
        name: 'inline eval() for a periodic check inside the step loop',
        code: `${M}model = Net()\nopt = torch.optim.SGD(model.parameters(), lr=0.1)\nfor step in range(1000):\n    x, y = torch.randn(4, 8), torch.zeros(4, dtype=torch.long)\n    opt.zero_grad()\n    F.cross_entropy(model(x), y).backward()\n    opt.step()\n    if step % 100 == 0:\n        model.eval()\n#       ^^^^^^^^^^^^ train-mode-not-restored\n        with torch.no_grad():\n            print(model(x).argmax(1))\n`,
        output: `${M}model = Net()\nopt = torch.optim.SGD(model.parameters(), lr=0.1)\nfor step in range(1000):\n    model.train()\n    x, y = torch.randn(4, 8), torch.zeros(4, dtype=torch.long)\n    opt.zero_grad()\n    F.cross_entropy(model(x), y).backward()\n    opt.step()\n    if step % 100 == 0:\n        model.eval()\n        with torch.no_grad():\n            print(model(x).argmax(1))\n`,
      },
    ],
  });
});
