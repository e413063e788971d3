// Table test for train-mode-not-restored: eval() inside a training loop that the next pass does not undo.
import { expect, test } from 'vitest';
import rule from '../../rules/train-mode-not-restored';
import { runRuleTable } from '../helpers/rule-tester';
import type { Rule } from '../../server/src/engine/rule';

const H = 'import torch\nimport torch.nn as nn\nimport torch.nn.functional as F\n';
const NET = `class Net(nn.Module):\n    def __init__(self):\n        super().__init__()\n        self.fc = nn.Linear(8, 8)\n        self.drop = nn.Dropout(0.5)\n        self.out = nn.Linear(8, 2)\n    def forward(self, x):\n        return self.out(self.drop(self.fc(x)))\n`;
const M = `${H}${NET}`;
const BN_NET = `class BnNet(nn.Module):\n    def __init__(self):\n        super().__init__()\n        self.fc = nn.Linear(8, 8)\n        self.bn = nn.BatchNorm1d(8)\n    def forward(self, x):\n        return self.bn(self.fc(x))\n`;
/** The classic epoch loop over the phases "train" and "val" (`loaders[phase]`), with the given mode switches. */
const PHASE_LOOP = (switches: string) =>
  `def train_model(model, loaders, criterion, optimizer, epochs=2):\n    for epoch in range(epochs):\n        for phase in ["train", "val"]:\n${switches}            for x, y in loaders[phase]:\n                loss = criterion(model(x), y)\n                if phase == "train":\n                    loss.backward()\n                    optimizer.step()\n`;
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
        name: 'the classic phase loop: train() on the train phase, eval() on the val phase',
        code: `${H}${PHASE_LOOP('            if phase == "train":\n                model.train()\n            else:\n                model.eval()\n')}`,
      },
      {
        name: 'phase loop over a tuple, the phase test through a local and a continue',
        code: `${M}def fit(model, loaders, opt):\n    for epoch in range(5):\n        for phase in ("train", "val"):\n            is_train = phase == "train"\n            model.train(is_train)\n            for x, y in loaders[phase]:\n                loss = F.cross_entropy(model(x), y)\n                if not is_train:\n                    continue\n                opt.zero_grad()\n                loss.backward()\n                opt.step()\n`,
      },
      {
        name: 'a model known to have neither dropout nor BatchNorm: the mode changes nothing',
        code: `${H}def fit(loader, val_loader):\n    model = nn.Sequential(nn.Linear(8, 8), nn.ReLU(), nn.LayerNorm(8), nn.Linear(8, 2))\n    opt = torch.optim.SGD(model.parameters(), lr=0.1)\n    for epoch in range(3):\n        for x, y in loader:\n            opt.zero_grad()\n            F.cross_entropy(model(x), y).backward()\n            opt.step()\n        model.eval()\n`,
      },
      {
        // a model from a library the view does not know is not followed at all: nothing is claimed about it
        name: 'a timm model switched to eval in the epoch loop: its type is unknown, so the rule stays quiet',
        code: `${H}import timm\ndef fit(loader):\n    model = timm.create_model("resnet50", pretrained=False)\n    opt = torch.optim.SGD(model.parameters(), lr=0.1)\n    for epoch in range(3):\n        for x, y in loader:\n            opt.zero_grad()\n            F.cross_entropy(model(x), y).backward()\n            opt.step()\n        model.eval()\n`,
      },
      {
        name: 'a teacher kept in eval on every pass is deliberate',
        code: `${M}def distil(student, teacher, opt, loader):\n    student.train()\n    for x, y in loader:\n        teacher.eval()\n        opt.zero_grad()\n        loss = F.mse_loss(student(x), teacher(x).detach())\n        loss.backward()\n        opt.step()\n`,
      },
    ],
    invalid: [
      {
        name: 'validate() in the epoch loop leaves eval mode for the next epoch',
        code: `${M}def validate(model, loader):\n    model.eval()\n#   ^^^^^^^^^^^^ train-mode-not-restored:notRestoredUnseen\n    with torch.no_grad():\n        return sum(F.cross_entropy(model(x), y).item() for x, y in loader)\ndef fit(model, opt, train_loader, val_loader, epochs):\n    model.train()\n    for epoch in range(epochs):\n        for x, y in train_loader:\n            opt.zero_grad()\n            F.cross_entropy(model(x), y).backward()\n            opt.step()\n        validate(model, val_loader)\n`,
        output: `${M}def validate(model, loader):\n    model.eval()\n    with torch.no_grad():\n        return sum(F.cross_entropy(model(x), y).item() for x, y in loader)\ndef fit(model, opt, train_loader, val_loader, epochs):\n    model.train()\n    for epoch in range(epochs):\n        model.train()\n        for x, y in train_loader:\n            opt.zero_grad()\n            F.cross_entropy(model(x), y).backward()\n            opt.step()\n        validate(model, val_loader)\n`,
        verify(found) {
          // `model` is a parameter of fit(): its layers are not known, so the message claims none
          expect(found[0].message).toBe('`model.eval()` in validate() (main.py:13) leaves `model` in evaluation mode, and the loop at main.py:18 trains it again at `F.cross_entropy(model(x), y).backward()` (main.py:21) with no `model.train()` in between: from the second pass on it learns in evaluation mode, so any dropout it has is off and any BatchNorm uses running statistics instead of batch statistics. Call `model.train()` at the top of the loop body.');
          expect(found[0].messageId).toBe('notRestoredUnseen');
        },
      },
      {
        name: 'phase loop that switches to eval for val and never back',
        code: `${H}${PHASE_LOOP('            if phase == "val":\n                model.eval()\n#               ^^^^^^^^^^^^ train-mode-not-restored:notRestoredDropout\n')}def main(loaders):\n    model = nn.Sequential(nn.Linear(8, 8), nn.Dropout(0.1), nn.Linear(8, 2))\n    model.train()\n    train_model(model, loaders, nn.CrossEntropyLoss(), torch.optim.SGD(model.parameters(), lr=0.1))\n`,
        output: `${H}def train_model(model, loaders, criterion, optimizer, epochs=2):\n    for epoch in range(epochs):\n        model.train()\n        for phase in ["train", "val"]:\n            if phase == "val":\n                model.eval()\n            for x, y in loaders[phase]:\n                loss = criterion(model(x), y)\n                if phase == "train":\n                    loss.backward()\n                    optimizer.step()\ndef main(loaders):\n    model = nn.Sequential(nn.Linear(8, 8), nn.Dropout(0.1), nn.Linear(8, 2))\n    model.train()\n    train_model(model, loaders, nn.CrossEntropyLoss(), torch.optim.SGD(model.parameters(), lr=0.1))\n`,
        verify(found) {
          // the epoch loop trains again (the phase loop's own next pass is "val"); the layers are those main() passes
          expect(found[0].message).toBe('`model.eval()` in train_model() (main.py:8) leaves `model` in evaluation mode, and the loop at main.py:5 trains it again at `loss.backward()` (main.py:12) with no `model.train()` in between: from the second pass on it learns with its dropout off (1 Dropout). Call `model.train()` at the top of the loop body.');
        },
      },
      {
        name: 'BatchNorm only: the message speaks of running statistics, not dropout',
        code: `${H}${BN_NET}def fit(loader):\n    model = BnNet()\n    opt = torch.optim.SGD(model.parameters(), lr=0.1)\n    for epoch in range(3):\n        for x, y in loader:\n            opt.zero_grad()\n            F.cross_entropy(model(x), y).backward()\n            opt.step()\n        model.eval()\n#       ^^^^^^^^^^^^ train-mode-not-restored:notRestoredNorm\n`,
        output: `${H}${BN_NET}def fit(loader):\n    model = BnNet()\n    opt = torch.optim.SGD(model.parameters(), lr=0.1)\n    for epoch in range(3):\n        model.train()\n        for x, y in loader:\n            opt.zero_grad()\n            F.cross_entropy(model(x), y).backward()\n            opt.step()\n        model.eval()\n`,
        verify(found) {
          expect(found[0].message).toBe('`model.eval()` in fit() (main.py:19) leaves `model` in evaluation mode, and the loop at main.py:14 trains it again at `F.cross_entropy(model(x), y).backward()` (main.py:17) with no `model.train()` in between: from the second pass on its normalization layers (1 BatchNorm1d) use running statistics instead of batch statistics while it learns, and stop updating them. Call `model.train()` at the top of the loop body.');
        },
      },
      {
        name: 'a torchvision model: the layers it is built with, not ones the view has seen',
        code: `${H}import torchvision\ndef fit(loader):\n    model = torchvision.models.resnet18(weights=None)\n    opt = torch.optim.SGD(model.parameters(), lr=0.1)\n    for epoch in range(3):\n        for x, y in loader:\n            opt.zero_grad()\n            F.cross_entropy(model(x), y).backward()\n            opt.step()\n        model.eval()\n#       ^^^^^^^^^^^^ train-mode-not-restored:notRestoredLibrary\n`,
        output: `${H}import torchvision\ndef fit(loader):\n    model = torchvision.models.resnet18(weights=None)\n    opt = torch.optim.SGD(model.parameters(), lr=0.1)\n    for epoch in range(3):\n        model.train()\n        for x, y in loader:\n            opt.zero_grad()\n            F.cross_entropy(model(x), y).backward()\n            opt.step()\n        model.eval()\n`,
        verify(found) {
          expect(found[0].message).toBe('`model.eval()` in fit() (main.py:13) leaves `model` in evaluation mode, and the loop at main.py:8 trains it again at `F.cross_entropy(model(x), y).backward()` (main.py:11) with no `model.train()` in between: from the second pass on the dropout or normalization layers resnet18 is built with behave as in evaluation while it learns. Call `model.train()` at the top of the loop body.');
        },
      },
      {
        name: 'inline eval() for a periodic check inside the step loop',
        code: `${M}model = Net()\nopt = torch.optim.SGD(model.parameters(), lr=0.1)\nfor step in range(1000):\n    x, y = torch.randn(4, 8), torch.zeros(4, dtype=torch.long)\n    opt.zero_grad()\n    F.cross_entropy(model(x), y).backward()\n    opt.step()\n    if step % 100 == 0:\n        model.eval()\n#       ^^^^^^^^^^^^ train-mode-not-restored:notRestoredDropout\n        with torch.no_grad():\n            print(model(x).argmax(1))\n`,
        output: `${M}model = Net()\nopt = torch.optim.SGD(model.parameters(), lr=0.1)\nfor step in range(1000):\n    model.train()\n    x, y = torch.randn(4, 8), torch.zeros(4, dtype=torch.long)\n    opt.zero_grad()\n    F.cross_entropy(model(x), y).backward()\n    opt.step()\n    if step % 100 == 0:\n        model.eval()\n        with torch.no_grad():\n            print(model(x).argmax(1))\n`,
        verify(found) {
          // dropout only: nothing about BatchNorm
          expect(found[0].message).toBe('`model.eval()` in the top level of main.py (main.py:20) leaves `model` in evaluation mode, and the loop at main.py:14 trains it again at `F.cross_entropy(model(x), y).backward()` (main.py:17) with no `model.train()` in between: from the second pass on it learns with its dropout off (1 Dropout). Call `model.train()` at the top of the loop body.');
        },
      },
    ],
  });
});
