// Reference checks for RULES.md section A: what each model-definition rule claims about PyTorch, measured by the
// Debian PyTorch through test/oracle/py/section_a.py; and Regwise's own fixes, applied and then run by PyTorch.
import * as fs from 'node:fs';
import * as os from 'node:os';
import * as path from 'node:path';
import { beforeAll, describe, expect, test } from 'vitest';
import { ruleById } from '../../rules/index';
import { Engine } from '../../server/src/engine/engine';
import { fixUntilStable } from '../../server/src/engine/fix';
import type { FixKind } from '../../server/src/engine/types';
import { parser } from '../helpers/rule-tester';
import { TORCH, oracleSuite, runOracle } from './python';

/* eslint-disable @typescript-eslint/no-explicit-any */
let A: any;

oracleSuite('section A oracle: PyTorch facts behind the model-definition rules', [TORCH], () => {
  beforeAll(() => {
    A = runOracle('section_a.py');
  }, 300_000);

  test('bias-before-norm: a bias before BatchNorm/InstanceNorm/GroupNorm(g = c) changes nothing; before LayerNorm or GroupNorm(2, 8) it does', () => {
    // Ioffe & Szegedy 2015 §3.2 (the bias is cancelled by the mean subtraction); training-mode outputs
    const b = A.bias_before_norm;
    expect(b.conv_then_batchnorm2d_max_abs_diff).toBeLessThan(1e-5);
    expect(b.conv_then_instancenorm2d_max_abs_diff).toBeLessThan(1e-5);
    expect(b.conv_then_groupnorm_groups_eq_channels_max_abs_diff).toBeLessThan(1e-5);
    expect(b.linear_then_batchnorm1d_max_abs_diff).toBeLessThan(1e-5);
    // RULES.md Grounds: LayerNorm over features and GroupNorm with several channels per group keep the bias
    expect(b.linear_then_layernorm_max_abs_diff).toBeGreaterThan(1e-2);
    expect(b.conv_then_groupnorm_2_of_8_max_abs_diff).toBeGreaterThan(1e-2);
  });

  test('selu-plain-dropout: in a SELU stack nn.Dropout moves mean/var away from (0, 1), AlphaDropout keeps them within 0.05', () => {
    // Klambauer et al. 2017, self-normalising fixed point (0, 1) and alpha dropout; tolerance 0.05 is ours
    const s = A.selu_dropout;
    expect(Math.abs(s.no_dropout.mean)).toBeLessThan(0.05);
    expect(Math.abs(s.no_dropout.var - 1)).toBeLessThan(0.05);
    expect(Math.abs(s.alpha_dropout.mean)).toBeLessThan(0.05);
    expect(Math.abs(s.alpha_dropout.var - 1)).toBeLessThan(0.05);
    expect(Math.abs(s.plain_dropout.var - 1)).toBeGreaterThan(0.2);
  });

  test('selu-plain-dropout: PyTorch AlphaDropout is the affine of Klambauer et al. (a, b closed form; RULES.md values)', () => {
    // Klambauer et al. 2017 closed form; RULES.md Grounds: rate 0.05 → a ≈ 0.95484, b ≈ 0.08394; rate 0.1 → 0.92128, 0.16197
    const r05 = A.alpha_dropout_affine['rate_0.05'];
    const r10 = A.alpha_dropout_affine['rate_0.1'];
    expect(r05.closed_form_a).toBeCloseTo(0.95484, 5);
    expect(r05.closed_form_b).toBeCloseTo(0.08394, 5);
    expect(r10.closed_form_a).toBeCloseTo(0.92128, 5);
    expect(r10.closed_form_b).toBeCloseTo(0.16197, 5);
    for (const r of [r05, r10]) {
      expect(Math.abs(r.torch_measured_a - r.closed_form_a)).toBeLessThan(1e-4);
      expect(Math.abs(r.torch_measured_b - r.closed_form_b)).toBeLessThan(1e-4);
      expect(Math.abs(r.torch_dropped_value - r.closed_form_dropped_value)).toBeLessThan(1e-4);
    }
  });

  test('alpha-dropout-without-selu: on ReLU outputs AlphaDropout shifts the mean and makes negative values; Dropout keeps the mean', () => {
    // Klambauer et al. 2017 (alpha dropout is fitted to the SELU fixed point); PyTorch docs torch.nn.Dropout (1/(1-p) rescale)
    const r = A.alpha_dropout_on_relu;
    expect(Math.abs(r.plain_dropout_mean - r.relu_mean) / r.relu_mean).toBeLessThan(0.01);
    expect(Math.abs(r.alpha_dropout_mean - r.relu_mean) / r.relu_mean).toBeGreaterThan(0.1);
    expect(r.relu_negative_fraction).toBe(0);
    expect(Math.abs(r.alpha_dropout_negative_fraction - r.rate)).toBeLessThan(0.01);
  });

  test("selu-init: kaiming_normal_(nonlinearity='linear') keeps a deep SELU stack near variance 1; 'relu' and 'selu' gains do not", () => {
    // PyTorch docs torch.nn.SELU (use nonlinearity='linear'), torch.nn.init.calculate_gain; Klambauer et al. 2017 (LeCun normal)
    const s = A.selu_init;
    expect(s.gain_linear).toBe(1);
    expect(s.gain_relu).toBeCloseTo(Math.SQRT2, 6);
    expect(s.gain_selu).toBeCloseTo(0.75, 6);
    expect(Math.abs(s.kaiming_linear.var - 1)).toBeLessThan(0.1);
    expect(s.kaiming_relu.var).toBeGreaterThan(2);
    expect(s.kaiming_selu.var).toBeLessThan(0.5);
  });

  test('selu-with-batchnorm: with BatchNorm an example\'s training output depends on the rest of its batch; a plain SELU stack does not', () => {
    // Ioffe & Szegedy 2015 (BN normalises with mini-batch statistics in training)
    const s = A.selu_with_batchnorm;
    expect(s.selu_stack_same_example_two_batches_max_abs_diff).toBe(0);
    expect(s.selu_bn_stack_same_example_two_batches_max_abs_diff).toBeGreaterThan(1e-3);
  });

  test('dropout-feeds-batchnorm: BN after dropout learns a running variance that inference inputs do not have', () => {
    // Li, Chen, Hu, Yang, CVPR 2019 (variance shift); p = 0.5 doubles the variance in training
    const d = A.dropout_feeds_batchnorm;
    expect(d.running_var_mean_learned_through_dropout / d.activation_var_at_inference).toBeGreaterThan(1.5);
    expect(Math.abs(d.activation_var_at_inference - 1)).toBeLessThan(0.05);
  });

  test('functional-dropout-always-on: F.dropout without training= still drops after eval(); with training=self.training two eval calls agree', () => {
    // PyTorch docs torch.nn.functional.dropout (training=True by default)
    const f = A.functional_dropout;
    expect(f.no_training_arg_eval_two_calls_max_abs_diff).toBeGreaterThan(0.1);
    expect(f.no_training_arg_eval_vs_input_max_abs_diff).toBeGreaterThan(0.1);
    expect(f.training_self_training_eval_two_calls_max_abs_diff).toBe(0);
    expect(f.training_self_training_eval_vs_input_max_abs_diff).toBe(0);
  });

  test('functional-alpha-dropout-never-on: F.alpha_dropout without training= leaves training outputs unchanged', () => {
    // PyTorch docs torch.nn.functional.alpha_dropout (training=False by default)
    const f = A.functional_alpha_dropout;
    expect(f.no_training_arg_train_mode_vs_input_max_abs_diff).toBe(0);
    expect(f.training_self_training_train_mode_vs_input_max_abs_diff).toBeGreaterThan(0.1);
  });

  test('drop-rate-range: p outside [0, 1] raises ValueError; p = 0.9 zeroes about 90%', () => {
    // PyTorch docs torch.nn.Dropout; Srivastava et al. 2014 (their p is the retention probability)
    const d = A.drop_rate_range;
    for (const k of ['dropout_1_5', 'dropout_minus_0_1', 'alpha_dropout_5']) {
      expect(d[k].raised, k).toBe(true);
      expect(d[k].type, k).toBe('ValueError');
    }
    expect(d.dropout_0_9.raised).toBe(false);
    expect(Math.abs(d.dropout_0_9_kept_fraction - 0.1)).toBeLessThan(0.01);
  });

  test('rnn-dropout-one-layer: a one-layer LSTM/GRU with dropout warns and behaves the same in train and eval', () => {
    // PyTorch docs torch.nn.LSTM (dropout between stacked layers); torch/nn/modules/rnn.py (the warning)
    const r = A.rnn_dropout_one_layer;
    expect(r.lstm_1_layer_dropout_0_2_warnings.length).toBe(1);
    expect(r.lstm_1_layer_dropout_0_2_warnings[0]).toMatch(/^UserWarning: .*num_layers/);
    expect(r.gru_1_layer_dropout_0_3_warnings.length).toBe(1);
    expect(r.lstm_2_layers_dropout_0_2_warnings).toEqual([]);
    expect(r.lstm_1_layer_train_vs_eval_max_abs_diff).toBe(0);
    expect(r.lstm_2_layers_train_vs_eval_max_abs_diff).toBeGreaterThan(1e-3);
  });

  test('norm-momentum-convention: BN running mean after one batch = (1 − m)·old + m·batch_mean, not the Keras form', () => {
    // PyTorch docs torch.nn.BatchNorm2d (momentum convention; defaults momentum=0.1, eps=1e-5); Keras BatchNormalization docs
    for (const k of ['m_0_1', 'm_0_99']) {
      const m = A.norm_momentum[k];
      expect(m.running_mean_max_error_vs_torch_formula, k).toBeLessThan(1e-5);
      expect(m.running_var_max_error_vs_torch_formula, k).toBeLessThan(1e-5);
      expect(m.running_mean_max_error_vs_keras_formula, k).toBeGreaterThan(0.1);
    }
    expect(A.norm_momentum.defaults).toEqual({ momentum: 0.1, eps: 1e-5, affine: true, track_running_stats: true });
  });

  test('norm-channel-mismatch: num_features ≠ channels and BN rank mismatches construct fine and raise at forward', () => {
    // PyTorch docs torch.nn.BatchNorm1d / BatchNorm2d (input shapes), torch.nn.GroupNorm
    const n = A.norm_channel_mismatch;
    expect(n.bn2d_32_after_conv_16_construct.raised).toBe(false);
    expect(n.bn2d_32_after_conv_16_forward.raised).toBe(true);
    expect(n.bn2d_32_after_conv_16_forward.type).toBe('RuntimeError');
    expect(n.bn2d_16_after_conv_16_forward.raised).toBe(false);
    expect(n.bn2d_after_linear_forward.type).toBe('ValueError');
    expect(n.bn1d_after_conv2d_forward.type).toBe('ValueError');
    expect(n.groupnorm_8_32_after_conv_16_forward.raised).toBe(true);
  });

  test('groupnorm-divisibility: GroupNorm(3, 16) raises at construction, GroupNorm(4, 16) does not', () => {
    // PyTorch docs torch.nn.GroupNorm (num_channels must be divisible by num_groups); Wu & He 2018
    expect(A.groupnorm_3_16.construct.raised).toBe(true);
    expect(A.groupnorm_3_16.construct.type).toBe('ValueError');
    expect(A.groupnorm_3_16.construct.message).toMatch(/divisible/);
    expect(A.groupnorm_4_16.construct.raised).toBe(false);
  });

  test('hand-rolled-dropout: an unscaled mask shrinks the mean to 1 − p; an ungated one still drops in eval', () => {
    // PyTorch docs torch.nn.Dropout (1/(1-p) scaling, identity in eval); Srivastava et al. 2014
    const h = A.hand_rolled_dropout;
    expect(Math.abs(h.mean_without_rescale - (1 - h.p))).toBeLessThan(0.01);
    expect(Math.abs(h.mean_with_rescale - 1)).toBeLessThan(0.01);
    expect(Math.abs(h.mean_nn_dropout - 1)).toBeLessThan(0.01);
    expect(h.ungated_eval_two_calls_max_abs_diff).toBeGreaterThan(0.1);
    expect(h.gated_eval_vs_input_max_abs_diff).toBe(0);
    expect(h.nn_dropout_eval_vs_input_max_abs_diff).toBe(0);
  });

  describe("Regwise's fixes, applied by the engine and run by PyTorch", () => {
    const tmp = fs.mkdtempSync(path.join(os.tmpdir(), 'regwise-oracle-'));

    /** Applies the rule's fixes (of `kind`) to `code` until stable, exactly as `regwise scan --fix` would. */
    async function applyFix(id: string, code: string, kind: FixKind): Promise<string> {
      const rule = ruleById(id);
      if (!rule) throw new Error(`rule ${id} is not registered in rules/index.ts`);
      const p = await parser();
      const analyse = (text: string) => {
        const e = new Engine(p, [rule]);
        e.setFile('main.py', text);
        return e.analyze();
      };
      expect(analyse(code).filter((f) => f.rule === id).length, `${id} should flag the snippet`).toBeGreaterThan(0);
      const res = fixUntilStable(p, 'main.py', code, kind, analyse);
      expect(res.applied.length, `${id} should offer a ${kind} fix`).toBeGreaterThan(0);
      expect(analyse(res.text).filter((f) => f.rule === id).map((f) => f.message), `${id} after its fix`).toEqual([]);
      return res.text;
    }

    /** Writes both versions and lets PyTorch measure them (test/oracle/py/fixed_model.py). */
    function measure(name: string, original: string, fixed: string, shape: number[]): any {
      const o = path.join(tmp, `${name}_original.py`);
      const f = path.join(tmp, `${name}_fixed.py`);
      fs.writeFileSync(o, original);
      fs.writeFileSync(f, fixed);
      return runOracle('fixed_model.py', [o, f, 'M', shape.join(',')]);
    }

    test('bias-before-norm: bias=False removes 16 parameters and leaves the training-mode output unchanged within 1e-5', async () => {
      // Ioffe & Szegedy 2015 §3.2
      const code = 'import torch\nimport torch.nn as nn\n\n\nclass M(nn.Module):\n    def __init__(self):\n        super().__init__()\n        self.conv = nn.Conv2d(3, 16, 3, padding=1)\n        self.bn = nn.BatchNorm2d(16)\n\n    def forward(self, x):\n        return torch.relu(self.bn(self.conv(x)))\n';
      const fixed = await applyFix('bias-before-norm', code, 'safe');
      const m = measure('bias_before_norm', code, fixed, [4, 3, 8, 8]);
      expect(m.original.construct_error).toBeNull();
      expect(m.fixed.construct_error).toBeNull();
      expect(m.original.param_count - m.fixed.param_count).toBe(16);
      expect(m.transfer).toEqual({ missing_keys: [], unexpected_keys: ['conv.bias'] });
      expect(m.train_output_original_vs_fixed_max_abs_diff).toBeLessThan(1e-5);
    });

    test('functional-dropout-always-on: after training=self.training two eval calls agree, training still drops as before', async () => {
      // PyTorch docs torch.nn.functional.dropout
      const code = 'import torch.nn as nn\nimport torch.nn.functional as F\n\n\nclass M(nn.Module):\n    def __init__(self):\n        super().__init__()\n        self.fc = nn.Linear(32, 8)\n\n    def forward(self, x):\n        return self.fc(F.dropout(x, p=0.5))\n';
      const fixed = await applyFix('functional-dropout-always-on', code, 'safe');
      const m = measure('functional_dropout', code, fixed, [16, 32]);
      expect(m.original.eval_two_calls_max_abs_diff).toBeGreaterThan(0.01);
      expect(m.fixed.eval_two_calls_max_abs_diff).toBe(0);
      expect(m.fixed.train_two_calls_max_abs_diff).toBeGreaterThan(0.01);
      expect(m.train_output_original_vs_fixed_max_abs_diff).toBe(0);
    });

    test('functional-alpha-dropout-never-on: after training=self.training alpha dropout acts in training and not in eval', async () => {
      // PyTorch docs torch.nn.functional.alpha_dropout; Klambauer et al. 2017
      const code = 'import torch.nn as nn\nimport torch.nn.functional as F\n\n\nclass M(nn.Module):\n    def __init__(self):\n        super().__init__()\n        self.fc = nn.Linear(32, 8)\n\n    def forward(self, x):\n        return self.fc(F.alpha_dropout(F.selu(x), p=0.2))\n';
      const fixed = await applyFix('functional-alpha-dropout-never-on', code, 'safe');
      const m = measure('functional_alpha_dropout', code, fixed, [16, 32]);
      expect(m.original.train_two_calls_max_abs_diff).toBe(0);
      expect(m.fixed.train_two_calls_max_abs_diff).toBeGreaterThan(0.01);
      expect(m.fixed.eval_two_calls_max_abs_diff).toBe(0);
    });

    test('rnn-dropout-one-layer: removing dropout= silences the warning and changes no output', async () => {
      // torch/nn/modules/rnn.py (warning); PyTorch docs torch.nn.LSTM
      const code = 'import torch.nn as nn\n\n\nclass M(nn.Module):\n    def __init__(self):\n        super().__init__()\n        self.rnn = nn.LSTM(4, 8, num_layers=1, batch_first=True, dropout=0.3)\n\n    def forward(self, x):\n        return self.rnn(x)[0]\n';
      const fixed = await applyFix('rnn-dropout-one-layer', code, 'suggested');
      const m = measure('rnn_dropout', code, fixed, [2, 5, 4]);
      expect(m.original.warnings.some((w: string) => /num_layers/.test(w))).toBe(true);
      expect(m.fixed.warnings).toEqual([]);
      expect(m.transfer).toEqual({ missing_keys: [], unexpected_keys: [] });
      expect(m.train_output_original_vs_fixed_max_abs_diff).toBe(0);
    });

    test('groupnorm-divisibility: the suggested group count constructs and runs where the original raised', async () => {
      // PyTorch docs torch.nn.GroupNorm
      const code = 'import torch.nn as nn\n\n\nclass M(nn.Module):\n    def __init__(self):\n        super().__init__()\n        self.conv = nn.Conv2d(3, 48, 3, padding=1, bias=False)\n        self.gn = nn.GroupNorm(32, 48)\n\n    def forward(self, x):\n        return self.gn(self.conv(x))\n';
      const fixed = await applyFix('groupnorm-divisibility', code, 'suggested');
      const m = measure('groupnorm', code, fixed, [2, 3, 8, 8]);
      expect(m.original.construct_error?.type).toBe('ValueError');
      expect(m.fixed.construct_error).toBeNull();
      expect(m.fixed.forward_error).toBeNull();
    });

    test('norm-channel-mismatch: the suggested channel count and the suggested BatchNorm rank run where forward raised', async () => {
      // torch/nn/modules/batchnorm.py (_check_input_dim), torch/nn/functional.py batch_norm
      const channels = 'import torch.nn as nn\n\n\nclass M(nn.Module):\n    def __init__(self):\n        super().__init__()\n        self.conv = nn.Conv2d(3, 96, 3, padding=1, bias=False)\n        self.bn = nn.BatchNorm2d(128)\n\n    def forward(self, x):\n        return self.bn(self.conv(x))\n';
      const fixedChannels = await applyFix('norm-channel-mismatch', channels, 'suggested');
      const c = measure('norm_channels', channels, fixedChannels, [2, 3, 8, 8]);
      expect(c.original.forward_error?.type).toBe('RuntimeError');
      expect(c.original.forward_error?.message).toMatch(/running_mean should contain 96 elements not 128/);
      expect(c.fixed.forward_error).toBeNull();
      const rank = 'import torch.nn as nn\n\n\nclass M(nn.Module):\n    def __init__(self):\n        super().__init__()\n        self.fc = nn.Linear(16, 64, bias=False)\n        self.bn = nn.BatchNorm2d(64)\n\n    def forward(self, x):\n        return self.bn(self.fc(x))\n';
      const fixedRank = await applyFix('norm-channel-mismatch', rank, 'suggested');
      const r = measure('norm_rank', rank, fixedRank, [4, 16]);
      expect(r.original.forward_error).toEqual({ type: 'ValueError', message: 'expected 4D input (got 2D input)' });
      expect(r.fixed.forward_error).toBeNull();
    });

    test('selu-plain-dropout: the AlphaDropout fix keeps the parameters and makes eval deterministic as before', async () => {
      // PyTorch docs torch.nn.AlphaDropout; Klambauer et al. 2017 (the mean/variance claim is measured above)
      const code = 'import torch.nn as nn\n\n\nclass M(nn.Module):\n    def __init__(self):\n        super().__init__()\n        self.net = nn.Sequential(nn.Linear(32, 64), nn.SELU(), nn.Dropout(0.2), nn.Linear(64, 8))\n\n    def forward(self, x):\n        return self.net(x)\n';
      const fixed = await applyFix('selu-plain-dropout', code, 'safe');
      expect(fixed).toContain('nn.AlphaDropout(0.2)');
      const m = measure('selu_plain_dropout', code, fixed, [16, 32]);
      expect(m.fixed.construct_error).toBeNull();
      expect(m.transfer).toEqual({ missing_keys: [], unexpected_keys: [] });
      expect(m.fixed.eval_two_calls_max_abs_diff).toBe(0);
      expect(m.fixed.train_two_calls_max_abs_diff).toBeGreaterThan(0.01);
    });
  });
});
