// The training view on its own: modes through branches, loops and calls, restoring summaries, wrappers, loader
// pairs, a walk budget; and, marked FIXME, what the mode tracking cannot follow yet (asserted as today's behaviour).
import { describe, expect, test } from 'vitest';
import { Views } from '../../server/src/engine/views';
import type { TrainingView } from '../../server/src/engine/views/training';
import { engineFor } from '../helpers/rule-tester';

const H = 'import torch\nimport torch.nn as nn\nimport torch.nn.functional as F\nfrom torch.utils.data import DataLoader\n';
const NET = `class Net(nn.Module):\n    def __init__(self):\n        super().__init__()\n        self.backbone = nn.Sequential(nn.Linear(8, 8), nn.BatchNorm1d(8))\n        self.drop = nn.Dropout(0.5)\n        self.out = nn.Linear(8, 2)\n    def forward(self, x):\n        return self.out(self.drop(self.backbone(x)))\n`;

async function view(code: string | Record<string, string>): Promise<TrainingView> {
  const e = await engineFor([], typeof code === 'string' ? { 'main.py': `${H}${NET}${code}` } : code);
  return new Views(e.ws).training;
}

const lines = (v: TrainingView) => v.evalFindings().map((f) => f.region.span.line);

describe('modes along program order', () => {
  test('eval() in one branch leaves train on the other path; in both branches it is eval', async () => {
    const one = await view(`def run(flag):\n    model = Net()\n    if flag:\n        model.eval()\n    with torch.no_grad():\n        model(torch.randn(2, 8))\n`);
    const f = one.evalFindings();
    expect(f.map((x) => [x.mode.t, x.mode.e.length])).toEqual([[true, 1]]);
    const both = await view(`def run(flag):\n    model = Net()\n    if flag:\n        model.eval()\n    else:\n        model.train(False)\n    with torch.no_grad():\n        model(torch.randn(2, 8))\n`);
    expect(lines(both)).toEqual([]);
  });

  test('a switch at the end of a loop body is the mode at its start on the next pass', async () => {
    const v = await view(`model = Net()\nopt = torch.optim.SGD(model.parameters(), lr=0.1)\nfor step in range(10):\n    opt.zero_grad()\n    model(torch.randn(2, 8)).sum().backward()\n    opt.step()\n    model.eval()\n`);
    expect(v.resumes.map((r) => [r.origin.text, r.loop.span.line, r.point.reportText])).toEqual([
      ['model.eval()', 14, 'model(torch.randn(2, 8)).sum().backward()'],
      ['model.eval()', 14, 'opt.step()'],
    ]);
  });

  test('train(flag) with an unknown flag is unknown: no finding either way', async () => {
    const v = await view(`def run(flag):\n    model = Net()\n    model.train(flag)\n    with torch.no_grad():\n        model(torch.randn(2, 8))\n`);
    expect(lines(v)).toEqual([]);
  });
});

describe('loops over constants, folded tests, break and continue', () => {
  const modesAt = (v: TrainingView, line: number) => v.evals.filter((e) => e.region.span.line === line).map((e) => [e.mode.t, e.mode.e.length]);

  test('`for phase in ("train", "val")` walks each phase with the phase bound; `phase == ...` and a derived local fold', async () => {
    const v = await view(`def run(loaders, opt):\n    model = Net()\n    for epoch in range(3):\n        for phase in ("train", "val"):\n            is_train = phase == "train"\n            model.train(is_train)\n            for x, y in loaders[phase]:\n                with torch.set_grad_enabled(is_train):\n                    loss = F.cross_entropy(model(x), y)\n                if not is_train:\n                    continue\n                opt.zero_grad()\n                loss.backward()\n                opt.step()\n`);
    // the region exists on the val pass only, and there the model is in eval (no train path reaches it)
    expect(modesAt(v, 19)).toEqual([[false, 1]]);
    expect(v.resumes).toEqual([]);
  });

  test('a loop over a literal list ends in its last item\'s mode; over more than eight items it is an ordinary loop', async () => {
    const body = (items: string) => `def run():\n    model = Net()\n    for phase in [${items}]:\n        if phase == "train":\n            model.train()\n        else:\n            model.eval()\n    with torch.no_grad():\n        model(torch.randn(2, 8))\n`;
    expect(lines(await view(body('"train", "val"')))).toEqual([]);
    expect(lines(await view(body('"val", "train"')))).toEqual([19]);
    const nine = ['"train"', ...'abcdefgh'.split('').map((c) => `"${c}"`)].join(', ');
    expect(modesAt(await view(body(nine)), 19)).toEqual([[true, 1]]);
  });

  test('`continue` carries the state it leaves to the next pass; `break` to the code after the loop', async () => {
    const cont = await view(`def run():\n    model = Net()\n    for i in range(3):\n        model.eval()\n        if i > 0:\n            continue\n        model.train()\n    with torch.no_grad():\n        model(torch.randn(2, 8))\n`);
    expect(modesAt(cont, 19)).toEqual([[true, 1]]);
    const brk = await view(`def run(n):\n    model = Net()\n    for i in range(n):\n        model.eval()\n        if i == 3:\n            break\n        model.train()\n    with torch.no_grad():\n        model(torch.randn(2, 8))\n`);
    expect(modesAt(brk, 19)).toEqual([[true, 1]]);
  });

  test('a name the loop body rebinds is not a constant on the next pass', async () => {
    // `mode` starts as "val" but the body rebinds it to a value the view cannot fold: the test is not folded
    const v = await view(`def run(next_mode):\n    model = Net()\n    for phase in ["val"]:\n        mode = phase\n        for step in range(3):\n            if mode == "val":\n                model.eval()\n            mode = next_mode()\n        with torch.no_grad():\n            model(torch.randn(2, 8))\n`);
    expect(modesAt(v, 20)).toEqual([[true, 1]]);
  });
});

describe('containers and unpacking', () => {
  test('`for m in [a, b]: m.eval()` switches each listed module; `a, b = Net(), Net()` binds each', async () => {
    const v = await view(`def run():\n    a, b = Net(), Net()\n    for m in [a, b]:\n        m.eval()\n    with torch.no_grad():\n        a(torch.randn(2, 8))\n        b(torch.randn(2, 8))\n`);
    expect(lines(v)).toEqual([]);
    const w = await view(`def run():\n    a, b = Net(), Net()\n    for m in [a]:\n        m.eval()\n    with torch.no_grad():\n        a(torch.randn(2, 8))\n        b(torch.randn(2, 8))\n`);
    expect(w.evalFindings().map((f) => f.ref.text)).toEqual(['b']);
  });
});

describe('function summaries', () => {
  test('a helper that restores the saved mode leaves the caller in its mode', async () => {
    const v = await view(`def peek(model, x):\n    was = model.training\n    model.eval()\n    with torch.no_grad():\n        y = model(x)\n    model.train(was)\n    return y\ndef run():\n    model = Net()\n    peek(model, torch.randn(2, 8))\n    with torch.no_grad():\n        model(torch.randn(2, 8))\n`);
    // peek's own region is in eval; the caller's region afterwards is in train again (restored)
    expect(lines(v)).toEqual([22]);
  });

  test('a callee that returns its parameter hands back the mode it set', async () => {
    const v = await view(`def fit(model):\n    model.train()\n    return model\ndef freeze(model):\n    model.eval()\n    return model\ndef run():\n    a = fit(Net())\n    b = freeze(Net())\n    with torch.no_grad():\n        a(torch.randn(2, 8))\n        b(torch.randn(2, 8))\n`);
    expect(v.evalFindings().map((f) => f.ref.text)).toEqual(['a']);
  });

  test('DDP and .to(device) keep the wrapped module: model.train() reaches net, net.backbone.eval() only the part', async () => {
    const v = await view(`from torch.nn.parallel import DistributedDataParallel as DDP\ndef run(rank, loader):\n    net = Net()\n    net.backbone.requires_grad_(False)\n    model = DDP(net.to(rank), device_ids=[rank])\n    opt = torch.optim.SGD(model.parameters(), lr=0.1)\n    for x, y in loader:\n        model.train()\n        net.backbone.eval()\n        opt.zero_grad()\n        F.cross_entropy(model(x), y).backward()\n        opt.step()\n`);
    expect(v.frozen).toEqual([]);
    expect(v.resumes).toEqual([]);
    expect(v.ddp.map((d) => [d.inner?.type, d.synced])).toEqual([['main.py::Net', false]]);
  });
});

describe('loader ↔ model pairs', () => {
  test('through a callee, enumerate() and an argparse default', async () => {
    const v = await view(`import argparse\ndef train_epoch(model, loader, opt):\n    model.train()\n    for i, (x, y) in enumerate(loader):\n        opt.zero_grad()\n        F.cross_entropy(model(x), y).backward()\n        opt.step()\ndef main():\n    p = argparse.ArgumentParser()\n    p.add_argument("--bs", type=int, default=3)\n    args = p.parse_args()\n    model = Net()\n    train_epoch(model, DataLoader(None, batch_size=args.bs), torch.optim.SGD(model.parameters(), lr=0.1))\n`);
    const p = v.pairs.find((x) => x.model.t === 'module');
    expect(p && p.loader.t === 'obj' ? [p.loader.kwargs.get('batch_size')?.t, p.via.length] : undefined).toEqual(['num', 1]);
  });
});

describe('robustness', () => {
  test('fourteen nested loops finish (the walk budget stops the fixed point from exploding)', async () => {
    let body = '    model(torch.randn(2, 8)).sum().backward()\n    model.eval()\n';
    for (let i = 0; i < 14; i++) body = `    for i${i} in range(3):\n${body.replace(/^/gm, '    ')}`;
    const v = await view(`model = Net()\ndef run():\n${body}`);
    expect(Array.isArray(v.resumes)).toBe(true);
  });
});

describe('globals and what the mode tracking cannot follow yet (FIXME: today the rules stay quiet)', () => {
  test('a global read inside a function has the mode the script left it in at the call', async () => {
    const v = await view(`model = Net()\ndef evaluate(x):\n    with torch.no_grad():\n        return model(x)\nevaluate(torch.randn(2, 8))\nmodel.eval()\nevaluate(torch.randn(2, 8))\n`);
    expect(v.evalFindings().map((f) => [f.region.span.line, f.via.map((s) => s.span.line)])).toEqual([[14, [16]]]);
    const quiet = await view(`model = Net()\ndef evaluate(x):\n    with torch.no_grad():\n        return model(x)\nmodel.eval()\nevaluate(torch.randn(2, 8))\n`);
    expect(lines(quiet)).toEqual([]);
  });

  test('FIXME: a global read in a function of another file is not followed', async () => {
    // FIXME: `from main import model` style globals across files are unknown in the callee
    const v = await view({
      'main.py': `${H}${NET}model = Net()\n`,
      'ev.py': `import torch\nfrom main import model\ndef evaluate(x):\n    with torch.no_grad():\n        return model(x)\n`,
      'run.py': `import torch\nfrom ev import evaluate\nevaluate(torch.randn(2, 8))\n`,
    });
    expect(lines(v)).toEqual([]);
  });

  test('methods called on self of a plain trainer class are not followed', async () => {
    // FIXME: `self.validate()` is not resolved (the interpreter gives plain-class instances no methods)
    const v = await view(`class Trainer:\n    def __init__(self, model):\n        self.model = model\n    def validate(self, x):\n        with torch.no_grad():\n            return self.model(x)\nTrainer(Net()).validate(torch.randn(2, 8))\n`);
    expect(lines(v)).toEqual([]);
  });

  test('switches inside a loop over model.modules() make the model unknown', async () => {
    // FIXME: only the Dropout layers are switched here, BatchNorm stays in training; the view gives up (quiet)
    const v = await view(`def run():\n    model = Net()\n    for m in model.modules():\n        if isinstance(m, nn.Dropout):\n            m.eval()\n    with torch.no_grad():\n        model(torch.randn(2, 8))\n`);
    expect(lines(v)).toEqual([]);
  });
});
