// Reference checks for RULES.md section B (training and evaluation): PyTorch facts measured by
// test/oracle/py/section_b.py, and programs run by the Debian PyTorch before and after Regwise's own fixes.
import { spawnSync } from 'node:child_process';
import * as fs from 'node:fs';
import * as os from 'node:os';
import * as path from 'node:path';
import { beforeAll, describe, expect, test } from 'vitest';
import { ruleById } from '../../rules/index';
import { Engine } from '../../server/src/engine/engine';
import { fixUntilStable } from '../../server/src/engine/fix';
import type { Finding, FixKind } from '../../server/src/engine/types';
import { parser } from '../helpers/rule-tester';
import { PYTHON, TORCH, oracleSuite, runOracle } from './python';

/* eslint-disable @typescript-eslint/no-explicit-any */
let B: any;

oracleSuite('section B oracle: PyTorch facts behind the training and evaluation rules', [TORCH], () => {
  beforeAll(() => {
    B = runOracle('section_b.py');
  }, 300_000);

  test('eval-mode-missing: under no_grad without eval() two passes differ and BN running stats move; after eval() neither', () => {
    // PyTorch autograd notes, "Locally disabling gradient computation"; torch.nn.Module.eval
    expect(B.no_grad_without_eval.module_training).toBe(true);
    expect(B.no_grad_without_eval.two_passes_max_abs_diff).toBeGreaterThan(1e-3);
    expect(B.no_grad_without_eval.bn_running_mean_max_abs_change).toBeGreaterThan(1e-4);
    expect(B.no_grad_without_eval.bn_num_batches_tracked).toBe(2);
    expect(B.inference_mode_without_eval.two_passes_max_abs_diff).toBeGreaterThan(1e-3);
    expect(B.no_grad_after_eval.module_training).toBe(false);
    expect(B.no_grad_after_eval.two_passes_max_abs_diff).toBe(0);
    expect(B.no_grad_after_eval.bn_running_mean_max_abs_change).toBe(0);
  });

  test('train-mode-not-restored / mode-switch-not-called: a forward pre-hook sees epoch 2 train in eval mode unless train() heads the loop; a bare `m.eval` changes nothing', () => {
    // PyTorch docs torch.nn.Module.train / eval (the flag stays until switched again)
    const t = B.train_mode_not_restored;
    expect(t.without_train_call.training_during_epoch_1_forward).toEqual([true, true]);
    expect(t.without_train_call.training_during_epoch_2_forward).toEqual([false, false]);
    expect(t.with_train_call_at_loop_head.training_during_epoch_2_forward).toEqual([true, true]);
    expect(t.with_train_call_at_loop_head.training_during_validation.every((x: boolean) => x === false)).toBe(true);
    expect(B.mode_switch_not_called.bare_model_eval_statement_training_during_validation.every((x: boolean) => x === true)).toBe(true);
  });

  test('frozen-norm-still-updating: requires_grad=False leaves BN running stats moving in train mode; eval() stops them', () => {
    // PyTorch docs torch.nn.BatchNorm2d (track_running_stats)
    expect(B.frozen_norm.bn_weight_requires_grad).toBe(false);
    expect(B.frozen_norm.running_mean_change_bn_left_in_train).toBeGreaterThan(1e-3);
    expect(B.frozen_norm.running_mean_change_bn_put_in_eval).toBe(0);
  });

  test('batchnorm-tiny-batch: BatchNorm1d raises at batch 1 in training (not at 2, not in eval); one sample depends on its batch partners, GroupNorm does not', () => {
    // torch/nn/functional.py batch_norm; Ioffe & Szegedy 2015 (batch statistics); Wu & He 2018 (GN per sample)
    const one = B.batch_of_one;
    expect(one.bn1d_train_batch_1).toMatch(/^Expected more than 1 value per channel when training/);
    expect(one.bn1d_train_batch_2).toBeNull();
    expect(one.bn1d_eval_batch_1).toBeNull();
    expect(one.bn2d_train_batch_1_spatial_4x4).toBeNull();
    const t = B.tiny_batch;
    expect(t.bn2d_sample0_change_when_partners_change_batch_2).toBeGreaterThan(t.bn2d_sample0_change_when_partners_change_batch_32);
    expect(t.groupnorm_sample0_change_when_partners_change_batch_2).toBe(0);
  });

  test('adam-coupled-weight-decay: one Adam step with weight_decay is Adam on grad + λθ and differs from AdamW; AdamW is decay-then-Adam; AdamW default 1e-2', () => {
    // Loshchilov & Hutter 2019; PyTorch docs torch.optim.Adam, torch.optim.AdamW
    const a = B.adam_vs_adamw;
    expect(a.adam_vs_adam_with_l2_added_to_grad_max_abs_diff).toBeLessThan(1e-7);
    expect(a.adamw_vs_decay_then_adam_max_abs_diff).toBeLessThan(1e-7);
    expect(a.adam_vs_adamw_max_abs_diff).toBeGreaterThan(1e-4);
    // the first Adam step is about lr per coordinate whatever the L2 term: the decay is normalised away
    expect(a.adam_step_size_max).toBeLessThan(1.01e-3);
    expect(a.adamw_step_size_max).toBeGreaterThan(1.5e-3);
    expect(a.adamw_default_weight_decay).toBe(0.01);
    expect(a.adam_default_weight_decay).toBe(0);
  });

  describe("Regwise's fixes, applied by the engine and run by PyTorch", () => {
    const tmp = fs.mkdtempSync(path.join(os.tmpdir(), 'regwise-oracle-b-'));

    async function findingsOf(id: string, code: string): Promise<Finding[]> {
      const rule = ruleById(id);
      if (!rule) throw new Error(`rule ${id} is not registered in rules/index.ts`);
      const e = new Engine(await parser(), [rule]);
      e.setFile('main.py', code);
      return e.analyze().filter((f) => f.rule === id || f.rule === 'internal-error');
    }

    async function applyFix(id: string, code: string, kind: FixKind): Promise<string> {
      const rule = ruleById(id)!;
      const p = await parser();
      const analyse = (text: string) => {
        const e = new Engine(p, [rule]);
        e.setFile('main.py', text);
        return e.analyze();
      };
      expect((await findingsOf(id, code)).length, `${id} should flag the program`).toBeGreaterThan(0);
      const res = fixUntilStable(p, 'main.py', code, kind, analyse);
      expect(res.applied.length, `${id} should offer a ${kind} fix`).toBeGreaterThan(0);
      expect((await findingsOf(id, res.text)).map((f) => f.message), `${id} after its fix`).toEqual([]);
      return res.text;
    }

    /** Runs a program that prints one JSON line. */
    function run(name: string, code: string): { json?: any; stderr: string; status: number | null } {
      const file = path.join(tmp, `${name}.py`);
      fs.writeFileSync(file, code);
      const r = spawnSync(PYTHON, [file], { encoding: 'utf8', timeout: 300_000 });
      if (r.error) throw r.error;
      const line = r.stdout.trim().split('\n').pop() ?? '';
      return { json: r.status === 0 ? JSON.parse(line) : undefined, stderr: r.stderr, status: r.status };
    }

    const NET = 'import json\nimport torch\nimport torch.nn as nn\nimport torch.nn.functional as F\n\n\nclass Net(nn.Module):\n    def __init__(self):\n        super().__init__()\n        self.fc = nn.Linear(8, 32, bias=False)\n        self.bn = nn.BatchNorm1d(32)\n        self.drop = nn.Dropout(0.5)\n        self.out = nn.Linear(32, 3)\n\n    def forward(self, x):\n        return self.out(self.drop(torch.relu(self.bn(self.fc(x)))))\n\n\n';

    test('eval-mode-missing: the flagged program gives two different predictions and moves BN statistics; the fixed one does neither', async () => {
      const code = `${NET}def predict(model, x):\n    with torch.no_grad():\n        return model(x)\n\n\ntorch.manual_seed(0)\nmodel = Net()\nx = torch.randn(16, 8)\nbefore = model.bn.running_mean.clone()\ny1 = predict(model, x)\ny2 = predict(model, x)\nprint(json.dumps({"diff": float((y1 - y2).abs().max()), "moved": float((model.bn.running_mean - before).abs().max())}))\n`;
      const fixed = await applyFix('eval-mode-missing', code, 'safe');
      expect(fixed).toContain('def predict(model, x):\n    model.eval()\n    with torch.no_grad():');
      const o = run('eval_original', code);
      const f = run('eval_fixed', fixed);
      expect(o.status, o.stderr).toBe(0);
      expect(f.status, f.stderr).toBe(0);
      expect(o.json.diff).toBeGreaterThan(1e-3);
      expect(o.json.moved).toBeGreaterThan(1e-4);
      expect(f.json.diff).toBe(0);
      expect(f.json.moved).toBe(0);
    });

    test('train-mode-not-restored: a hook sees the 2nd epoch train with training == False; after the fix it is True', async () => {
      const code = `${NET}def validate(model, x):\n    model.eval()\n    with torch.no_grad():\n        return float(model(x).sum())\n\n\ntorch.manual_seed(0)\nseen = []\nphase = {"epoch": 0}\nmodel = Net()\nmodel.register_forward_pre_hook(lambda m, inp: seen.append([phase["epoch"], m.training]) if torch.is_grad_enabled() else None)\nopt = torch.optim.SGD(model.parameters(), lr=0.01)\nx, y = torch.randn(4, 8), torch.randint(0, 3, (4,))\nmodel.train()\nfor epoch in range(3):\n    phase["epoch"] = epoch\n    for step in range(2):\n        opt.zero_grad()\n        F.cross_entropy(model(x), y).backward()\n        opt.step()\n    validate(model, x)\nprint(json.dumps(seen))\n`;
      const fixed = await applyFix('train-mode-not-restored', code, 'safe');
      expect(fixed).toContain('for epoch in range(3):\n    model.train()\n    phase["epoch"] = epoch');
      const o = run('resume_original', code);
      const f = run('resume_fixed', fixed);
      expect(o.status, o.stderr).toBe(0);
      expect(f.status, f.stderr).toBe(0);
      const modes = (seen: [number, boolean][], epoch: number) => seen.filter(([e]) => e === epoch).map(([, t]) => t);
      expect(modes(o.json, 0)).toEqual([true, true]);
      expect(modes(o.json, 1)).toEqual([false, false]);
      expect(modes(f.json, 1)).toEqual([true, true]);
      expect(modes(f.json, 2)).toEqual([true, true]);
    });

    test('batchnorm-tiny-batch: the program Regwise marks as an error raises in PyTorch; with batch_size 4 it runs', async () => {
      const code = `${NET}from torch.utils.data import DataLoader, TensorDataset\n\ntorch.manual_seed(0)\nmodel = Net()\nopt = torch.optim.SGD(model.parameters(), lr=0.01)\ndata = TensorDataset(torch.randn(8, 8), torch.randint(0, 3, (8,)))\nfor x, y in DataLoader(data):\n    opt.zero_grad()\n    F.cross_entropy(model(x), y).backward()\n    opt.step()\nprint(json.dumps({"ok": True}))\n`;
      const found = await findingsOf('batchnorm-tiny-batch', code);
      expect(found.map((f) => [f.level, f.messageId])).toEqual([['error', 'raises']]);
      const o = run('tiny_original', code);
      expect(o.status).not.toBe(0);
      expect(o.stderr).toContain('Expected more than 1 value per channel when training');
      const ok = code.replace('DataLoader(data)', 'DataLoader(data, batch_size=4)');
      expect((await findingsOf('batchnorm-tiny-batch', ok)).map((f) => [f.level, f.messageId])).toEqual([['warning', 'tiny']]);
      expect(run('tiny_batch4', ok).status).toBe(0);
    });
  });
});
