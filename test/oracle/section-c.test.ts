// Reference checks for RULES.md section C: what the data-pipeline rules claim about scikit-learn and torchvision,
// measured by the Debian packages through test/oracle/py/section_c.py — including Regwise's own refit fix, run.
import * as fs from 'node:fs';
import * as os from 'node:os';
import * as path from 'node:path';
import { beforeAll, expect, test } from 'vitest';
import refitRule from '../../rules/norm-refit-on-holdout';
import { Engine } from '../../server/src/engine/engine';
import { fixUntilStable } from '../../server/src/engine/fix';
import type { Rule } from '../../server/src/engine/rule';
import { parser } from '../helpers/rule-tester';
import { TORCH, oracleSuite, runOracle, type PyNeed } from './python';

const NEEDS: PyNeed[] = [
  { module: 'numpy', debian: 'python3-numpy' },
  { module: 'sklearn', debian: 'python3-sklearn' },
  TORCH,
  { module: 'torchvision', debian: 'python3-torchvision' },
  { module: 'PIL', debian: 'python3-pil' },
];
const ROOT = path.resolve(__dirname, '..', '..');
const SAMPLE = path.join(ROOT, 'samples', 'hive_health');

/* eslint-disable @typescript-eslint/no-explicit-any */
let C: any;
let original = '';
let fixed = '';

oracleSuite('section C oracle: scikit-learn and torchvision facts behind the data-pipeline rules', NEEDS, () => {
  beforeAll(async () => {
    // Regwise's own fix on the sample it was planted in: samples/hive_health/train.py, holdout_logreg()
    const p = await parser();
    const rules = [refitRule as unknown as Rule];
    const files = ['train.py', 'prep.py', 'model.py'];
    const texts = Object.fromEntries(files.map((f) => [f, fs.readFileSync(path.join(SAMPLE, f), 'utf8')]));
    original = texts['train.py'];
    const target = 'samples/hive_health/train.py';
    const res = fixUntilStable(p, target, original, 'safe', (text) => {
      const e = new Engine(p, rules);
      for (const f of files) e.setFile(`samples/hive_health/${f}`, f === 'train.py' ? text : texts[f]);
      return e.analyze([target]);
    });
    fixed = res.text;
    const dir = fs.mkdtempSync(path.join(os.tmpdir(), 'regwise-refit-'));
    fs.writeFileSync(path.join(dir, 'train.py'), fixed);
    for (const f of ['prep.py', 'model.py']) fs.writeFileSync(path.join(dir, f), texts[f]);
    C = runOracle('section_c.py', ['--refit-sample', dir]);
  }, 300_000);

  test('scikit-learn "Common pitfalls" example: selection fitted on all rows scores well above chance on random labels, a Pipeline does not', () => {
    // scikit-learn user guide, "Common pitfalls and recommended practices", Data leakage during pre-processing:
    // the page prints 0.76 for the leaky split (read in a public copy of the example, not on the page itself) and
    // 0.46 for the Pipeline (memory); the Debian scikit-learn reproduces both here, the bounds below are ours
    const s = C.selection_before_split;
    expect(s.leaky_accuracy).toBeGreaterThan(0.7);
    expect(Math.abs(s.pipeline_accuracy - s.test_chance_level)).toBeLessThan(0.15);
    expect(s.leaky_accuracy - s.pipeline_accuracy).toBeGreaterThan(0.2);
    // the same with 5-fold cross-validation (scaled-before-cv / norm-fit-before-split, cv message)
    const cv = C.selection_before_cv;
    expect(cv.leaky_mean_accuracy).toBeGreaterThan(cv.chance_level + 0.1);
    expect(Math.abs(cv.pipeline_mean_accuracy - 0.5)).toBeLessThan(0.1);
  });

  test('norm-fit-before-split: a scaler fitted on all rows moves when only held-out rows change; a training-part fit does not', () => {
    // scikit-learn docs, StandardScaler (mean_, scale_ are learned in fit) and Common pitfalls (fit on the training split)
    const f = C.fit_before_split;
    expect(f.full_fit_mean_change_when_holdout_changes).toBeGreaterThan(0.1);
    expect(f.full_fit_scale_change_when_holdout_changes).toBeGreaterThan(0.01);
    expect(f.train_fit_mean_change_when_holdout_changes).toBe(0);
    expect(f.train_fit_scale_change_when_holdout_changes).toBe(0);
    // why the rule leaves Normalizer alone: scikit-learn docs, Normalizer (each sample is rescaled independently)
    expect(f.normalizer_full_vs_train_fit_max_abs_diff).toBe(0);
  });

  test('scaled-before-cv: scaling fitted on all rows leaves a training fold off-centre; a per-fold fit centres it', () => {
    // scikit-learn docs, Common pitfalls (use a Pipeline inside cross-validation)
    const s = C.scaled_before_cv;
    expect(s.train_fold_mean_under_global_fit_max_abs).toBeGreaterThan(0.1);
    expect(s.train_fold_mean_under_fold_fit_max_abs).toBeLessThan(1e-12);
  });

  test('norm-refit-on-holdout: refitted held-out rows get mean 0 from themselves; under the training fit they keep their shift', () => {
    // scikit-learn docs, Common pitfalls, Inconsistent preprocessing; StandardScaler
    const r = C.refit_on_holdout;
    expect(r.refit_test_feature_means_max_abs).toBeLessThan(1e-12);
    expect(r.refit_test_feature_std_max_abs_dev_from_1).toBeLessThan(1e-12);
    expect(r.train_fit_test_feature_means_min_abs).toBeGreaterThan(0.1);
    expect(r.transform_vs_pipeline_predict_proba_max_abs_diff).toBe(0);
    expect(r.fit_transform_vs_pipeline_predict_proba_max_abs_diff).toBeGreaterThan(0.01);
  });

  test("norm-refit-on-holdout: Regwise's fix on samples/hive_health/train.py makes holdout_logreg() equal a Pipeline fitted on the training part", () => {
    // the fix is exactly fit_transform(X_test) -> transform(X_test) on the planted line
    const a = original.split('\n');
    const b = fixed.split('\n');
    const changed = a.map((l, i) => (l !== b[i] ? i + 1 : 0)).filter(Boolean);
    expect(changed).toEqual([43]);
    expect(a[42].trim()).toBe('X_test = scaler.fit_transform(X_test)');
    expect(b[42].trim()).toBe('X_test = scaler.transform(X_test)');
    // scikit-learn docs, Pipeline: fit on the training part, transform at predict time
    expect(C.refit_fix_sample.original.predict_proba_max_abs_diff_vs_pipeline).toBeGreaterThan(1e-3);
    expect(C.refit_fix_sample.fixed.predict_proba_max_abs_diff_vs_pipeline).toBe(0);
    expect(C.refit_fix_sample.fixed.accuracy).toBe(C.refit_fix_sample.fixed.pipeline_accuracy);
  });

  test('augment-on-eval-data: a random evaluation transform gives two different tensors for one image; Resize + CenterCrop gives one', () => {
    // torchvision docs, RandomResizedCrop / RandomHorizontalFlip draw new parameters per call
    const t = C.torchvision;
    expect(typeof t).toBe('object');
    expect(t.random_eval_transform_two_calls_differ).toBe(true);
    expect(t.random_eval_transform_two_calls_max_abs_diff).toBeGreaterThan(0.1);
    expect(t.deterministic_eval_transform_two_calls_differ).toBe(false);
    expect(t.horizontal_flip_unchanged_count_of_20).toBeGreaterThan(0);
    expect(t.horizontal_flip_unchanged_count_of_20).toBeLessThan(20);
  });

  test('eval-transform-mismatch: Normalize is (x - mean[c]) / std[c] and moves inputs far from the unnormalized ones', () => {
    // torchvision docs, transforms.Normalize; ImageNet constants (common practice)
    const t = C.torchvision;
    expect(t.normalize_formula_max_abs_error).toBeLessThan(1e-6);
    expect(t.normalized_vs_unnormalized_max_abs_diff).toBeGreaterThan(1);
  });
});
