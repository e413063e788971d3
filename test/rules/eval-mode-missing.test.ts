// Table test for eval-mode-missing: evaluation regions reached in training mode, through callers and callees.
import { expect, test } from 'vitest';
import rule from '../../rules/eval-mode-missing';
import { runRuleTable } from '../helpers/rule-tester';
import type { Rule } from '../../server/src/engine/rule';

const H = 'import torch\nimport torch.nn as nn\n';
const NET = `class Net(nn.Module):\n    def __init__(self):\n        super().__init__()\n        self.fc = nn.Linear(8, 8)\n        self.drop = nn.Dropout(0.5)\n        self.out = nn.Linear(8, 2)\n    def forward(self, x):\n        return self.out(self.drop(self.fc(x)))\n`;
const M = `${H}${NET}`;
/** A model with only BatchNorm, and one with both kinds. */
const BN_NET = `class BnNet(nn.Module):\n    def __init__(self):\n        super().__init__()\n        self.fc = nn.Linear(8, 8)\n        self.bn = nn.BatchNorm1d(8)\n    def forward(self, x):\n        return self.bn(self.fc(x))\n`;
const BOTH_NET = `class BothNet(nn.Module):\n    def __init__(self):\n        super().__init__()\n        self.fc = nn.Linear(8, 8)\n        self.bn = nn.BatchNorm1d(8)\n        self.drop = nn.Dropout(0.2)\n    def forward(self, x):\n        return self.drop(self.bn(self.fc(x)))\n`;
const TV = `${H}import torchvision\nfrom torchvision import models\n`;
/** The classic two-phase epoch: a loop over "train"/"val" that switches the mode by phase. */
const PHASES = (region: string, switchVal: string) =>
  `${M}def run(loaders, opt):\n    model = Net()\n    for epoch in range(3):\n        for phase in ["train", "val"]:\n            if phase == "train":\n                model.train()\n${switchVal}            for x, y in loaders[phase]:\n                with ${region}:\n                    loss = model(x).sum()\n                    if phase == "train":\n                        opt.zero_grad()\n                        loss.backward()\n                        opt.step()\n`;

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
      {
        name: 'unknown model types from model hubs (timm, torch.hub) stay quiet',
        code: `${H}import timm\nencoder = timm.create_model("resnet50", pretrained=False)\nhub_net = torch.hub.load("some/repo", "net")\nwith torch.no_grad():\n    a = encoder(torch.randn(1, 3, 224, 224))\n    b = hub_net(torch.randn(1, 3, 224, 224))\n`,
      },
      {
        name: 'eval() chained onto a torchvision constructor',
        code: `${TV}def features(images):\n    backbone = models.resnet18(weights="IMAGENET1K_V1").eval()\n    with torch.inference_mode():\n        return backbone(images)\n`,
      },
      {
        name: 'train(False) and .to() chained onto a user model, and eval() before .to() on a torchvision one',
        code: `${TV}${NET}def features(images):\n    a = Net().train(False).to("cpu")\n    b = torchvision.models.resnet18().eval().to("cpu")\n    with torch.no_grad():\n        return a(images), b(images)\n`,
      },
      {
        name: 'phase loop: the val pass switches to eval before its no_grad region',
        code: `${M}def run(loaders, opt):\n    model = Net()\n    for epoch in range(3):\n        for phase in ["train", "val"]:\n            if phase == "train":\n                model.train()\n            else:\n                model.eval()\n            for x, y in loaders[phase]:\n                if phase == "train":\n                    opt.zero_grad()\n                    model(x).sum().backward()\n                    opt.step()\n                else:\n                    with torch.no_grad():\n                        model(x)\n`,
      },
      {
        name: 'phase loop: set_grad_enabled(phase == "train") is a region only on the val pass, which is in eval',
        code: PHASES('torch.set_grad_enabled(phase == "train")', '            if phase == "val":\n                model.eval()\n'),
      },
    ],
    invalid: [
      {
        name: 'a bare `model.eval` before the region: its own fix (add the call) is the one offered',
        code: `${M}model = Net()\nmodel.eval\nwith torch.no_grad():\n#    ^^^^^^^^^^^^^^^ eval-mode-missing:missingDropout\n    y = model(torch.randn(2, 8))\n`,
        verify(found) {
          expect(found[0].fixes).toEqual([]);
        },
      },
      {
        name: 'a bare `model.eval` in another function does not stand in for this fix',
        code: `${M}def reset(model):\n    model.eval\ndef score(x):\n    model = Net()\n    with torch.no_grad():\n#        ^^^^^^^^^^^^^^^ eval-mode-missing:missingDropout\n        return model(x)\n`,
        output: `${M}def reset(model):\n    model.eval\ndef score(x):\n    model = Net()\n    model.eval()\n    with torch.no_grad():\n        return model(x)\n`,
      },
      {
        name: 'fresh module evaluated without eval()',
        code: `${M}model = Net()\nwith torch.no_grad():\n#    ^^^^^^^^^^^^^^^ eval-mode-missing:missingDropout\n    y = model(torch.randn(2, 8))\n`,
        output: `${M}model = Net()\nmodel.eval()\nwith torch.no_grad():\n    y = model(torch.randn(2, 8))\n`,
        verify(found) {
          // dropout only: nothing about batch statistics
          expect(found[0].message).toBe('Net `model` is evaluated under `torch.no_grad()` in the top level of main.py but may still be in training mode: its dropout layers (1 Dropout) keep dropping activations, so the outputs are random. Call `model.eval()` before the region.');
        },
      },
      {
        name: 'BatchNorm only: the message speaks of statistics, not dropout',
        code: `${H}${BN_NET}def score(x):\n    net = BnNet()\n    with torch.no_grad():\n#        ^^^^^^^^^^^^^^^ eval-mode-missing:missingNorm\n        return net(x)\n`,
        output: `${H}${BN_NET}def score(x):\n    net = BnNet()\n    net.eval()\n    with torch.no_grad():\n        return net(x)\n`,
        verify(found) {
          expect(found[0].message).toBe('BnNet `net` is evaluated under `torch.no_grad()` in score() but may still be in training mode: its normalization layers (1 BatchNorm1d) keep using the statistics of the evaluated inputs instead of their running statistics, and keep updating those. Call `net.eval()` before the region.');
        },
      },
      {
        name: 'dropout and BatchNorm: both effects',
        code: `${H}${BOTH_NET}def score(x):\n    net = BothNet()\n    with torch.no_grad():\n#        ^^^^^^^^^^^^^^^ eval-mode-missing:missing\n        return net(x)\n`,
        output: `${H}${BOTH_NET}def score(x):\n    net = BothNet()\n    net.eval()\n    with torch.no_grad():\n        return net(x)\n`,
        verify(found) {
          expect(found[0].message).toBe('BothNet `net` is evaluated under `torch.no_grad()` in score() but may still be in training mode: its layers (1 BatchNorm1d, 1 Dropout) behave as in training: dropout keeps dropping activations, and normalization keeps using the statistics of the evaluated inputs and updating its running statistics. Call `net.eval()` before the region.');
        },
      },
      {
        name: '.to(device) chained onto a torchvision constructor: the type is the constructor\'s',
        code: `${TV}def features(images):\n    backbone = models.resnet18().to("cuda")\n    with torch.inference_mode():\n#        ^^^^^^^^^^^^^^^^^^^^^^ eval-mode-missing:missingLibrary\n        return backbone(images)\n`,
        output: `${TV}def features(images):\n    backbone = models.resnet18().to("cuda")\n    backbone.eval()\n    with torch.inference_mode():\n        return backbone(images)\n`,
        verify(found) {
          expect(found[0].message).toBe('resnet18 `backbone` is evaluated under `torch.inference_mode()` in features() but may still be in training mode: resnet18 is built with dropout or normalization layers, which behave as in training until `.eval()`. Call `backbone.eval()` before the region.');
        },
      },
      {
        name: 'a chain whose last switch is train()',
        code: `${M}def score(x):\n    net = Net().eval().train()\n    with torch.no_grad():\n#        ^^^^^^^^^^^^^^^ eval-mode-missing:missingDropout\n        return net(x)\n`,
        output: `${M}def score(x):\n    net = Net().eval().train()\n    net.eval()\n    with torch.no_grad():\n        return net(x)\n`,
      },
      {
        name: 'phase loop without eval(): the val pass of set_grad_enabled(phase == "train") is flagged, with no fix (the line is shared with the train pass)',
        code: PHASES('torch.set_grad_enabled(phase == "train")', '').replace('set_grad_enabled(phase == "train"):\n', 'set_grad_enabled(phase == "train"):\n#                    ^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^^ eval-mode-missing:missingDropout\n'),
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
        verify(found) {
          // the layers are not built by the view: the message says only what the constructor is known to hold
          expect(found[0].message).toBe('resnet18 `net` is evaluated under `torch.no_grad()` in the top level of main.py but may still be in training mode: resnet18 is built with dropout or normalization layers, which behave as in training until `.eval()`. Call `net.eval()` before the region.');
        },
      },
    ],
  });
});
