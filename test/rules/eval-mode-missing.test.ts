// Table test for eval-mode-missing: evaluation regions reached in training mode, through callers and callees.
import { test } from 'vitest';
import rule from '../../rules/eval-mode-missing';
import { runRuleTable } from '../helpers/rule-tester';
import type { Rule } from '../../server/src/engine/rule';

const H = 'import torch\nimport torch.nn as nn\n';
const NET = `class Net(nn.Module):\n    def __init__(self):\n        super().__init__()\n        self.fc = nn.Linear(8, 8)\n        self.drop = nn.Dropout(0.5)\n        self.out = nn.Linear(8, 2)\n    def forward(self, x):\n        return self.out(self.drop(self.fc(x)))\n`;
const M = `${H}${NET}`;

test('eval-mode-missing', async () => {
  await runRuleTable(rule as unknown as Rule, {
    valid: [
      { name: 'eval() before the no_grad region', code: `${M}model = Net()\nmodel.eval()\nwith torch.no_grad():\n    y = model(torch.randn(2, 8))\n` },
      {
        name: 'the caller switches to eval before calling the evaluating function',
        code: `${M}def predict(model, x):\n    with torch.no_grad():\n        return model(x)\ndef main():\n    model = Net()\n    model.eval()\n    return predict(model, torch.randn(2, 8))\n`,
      },
      {
        name: 'the callee switches to eval itself',
        code: `${M}def evaluate(model, x):\n    model.eval()\n    with torch.no_grad():\n        return model(x)\ndef main():\n    model = Net()\n    model.train()\n    return evaluate(model, torch.randn(2, 8))\n`,
      },
      {
        name: 'module with neither dropout nor BatchNorm (LayerNorm behaves the same in both modes)',
        code: `${H}probe = nn.Sequential(nn.Linear(8, 8), nn.LayerNorm(8), nn.ReLU(), nn.Linear(8, 2))\nwith torch.no_grad():\n    y = probe(torch.randn(2, 8))\n`,
      },
      {
        name: 'Monte-Carlo dropout marked by an allowance',
        code: `${M}model = Net()\nwith torch.no_grad():  # regwise: allow eval-mode-missing -- MC dropout: sampling on purpose\n    samples = [model(torch.randn(2, 8)) for _ in range(20)]\n`,
      },
      {
        name: 'trainer hook on a LightningModule: the framework switches modes',
        code: `${H}import lightning as L\n${NET}class Lit(L.LightningModule):\n    def __init__(self):\n        super().__init__()\n        self.net = Net()\n    def validation_step(self, batch, batch_idx):\n        x, y = batch\n        with torch.no_grad():\n            return (self.net(x).argmax(1) == y).float().mean()\n`,
      },
      {
        name: 'unknown model type (loaded object) stays quiet',
        code: `${H}model = torch.load("model.pt")\nwith torch.no_grad():\n    y = model(torch.randn(2, 8))\n`,
      },
    ],
    invalid: [
      {
        name: 'fresh module evaluated without eval()',
        code: `${M}model = Net()\nwith torch.no_grad():\n#    ^^^^^^^^^^^^^^^ eval-mode-missing:missing\n    y = model(torch.randn(2, 8))\n`,
        output: `${M}model = Net()\nmodel.eval()\nwith torch.no_grad():\n    y = model(torch.randn(2, 8))\n`,
        verify(found) {
          const m = found[0].message;
          if (!m.includes('Net `model`') || !m.includes('1 Dropout') || !m.includes('`torch.no_grad()`')) throw new Error(m);
        },
      },
      {
        name: 'callee evaluates in the mode its caller left (training after fit)',
        code: `${M}def evaluate(model, x):\n    with torch.no_grad():\n#        ^^^^^^^^^^^^^^^ eval-mode-missing\n        return model(x).argmax(1)\ndef main(opt):\n    model = Net()\n    model.train()\n    model(torch.randn(2, 8)).sum().backward()\n    return evaluate(model, torch.randn(2, 8))\n`,
        output: `${M}def evaluate(model, x):\n    model.eval()\n    with torch.no_grad():\n        return model(x).argmax(1)\ndef main(opt):\n    model = Net()\n    model.train()\n    model(torch.randn(2, 8)).sum().backward()\n    return evaluate(model, torch.randn(2, 8))\n`,
        verify(found) {
          if (found[0].related[0]?.span.line !== 17) throw new Error(`related should be the call site: ${JSON.stringify(found[0].related)}`);
        },
      },
      {
        name: 'accuracy(model.train(), ...) passes a train-mode module',
        code: `${M}def accuracy(model, x, y):\n    with torch.inference_mode():\n#        ^^^^^^^^^^^^^^^^^^^^^^ eval-mode-missing\n        return (model(x).argmax(1) == y).float().mean()\nmodel = Net()\nmodel.eval()\nacc = accuracy(model.train(), torch.randn(2, 8), torch.zeros(2))\n`,
        output: `${M}def accuracy(model, x, y):\n    model.eval()\n    with torch.inference_mode():\n        return (model(x).argmax(1) == y).float().mean()\nmodel = Net()\nmodel.eval()\nacc = accuracy(model.train(), torch.randn(2, 8), torch.zeros(2))\n`,
      },
      {
        name: 'eval() on one path only',
        code: `${M}def run(check):\n    model = Net()\n    if check:\n        model.eval()\n    with torch.no_grad():\n#        ^^^^^^^^^^^^^^^ eval-mode-missing\n        return model(torch.randn(2, 8))\n`,
        output: `${M}def run(check):\n    model = Net()\n    if check:\n        model.eval()\n    model.eval()\n    with torch.no_grad():\n        return model(torch.randn(2, 8))\n`,
      },
      {
        name: 'no_grad decorator: eval() goes first in the function, after the docstring',
        code: `${M}@torch.no_grad()\n#^^^^^^^^^^^^^^^ eval-mode-missing\ndef predict(model, x):\n    """Scores for x."""\n    return model(x)\nscores = predict(Net(), torch.randn(2, 8))\n`,
        output: `${M}@torch.no_grad()\ndef predict(model, x):\n    """Scores for x."""\n    model.eval()\n    return model(x)\nscores = predict(Net(), torch.randn(2, 8))\n`,
      },
      {
        name: 'torchvision classification model counts as caring',
        code: `${H}import torchvision\nnet = torchvision.models.resnet18(weights=None)\nwith torch.no_grad():\n#    ^^^^^^^^^^^^^^^ eval-mode-missing\n    logits = net(torch.randn(1, 3, 224, 224))\n`,
        output: `${H}import torchvision\nnet = torchvision.models.resnet18(weights=None)\nnet.eval()\nwith torch.no_grad():\n    logits = net(torch.randn(1, 3, 224, 224))\n`,
      },
    ],
  });
});
