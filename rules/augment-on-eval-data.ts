// augment-on-eval-data: random augmentation in the transform of a validation or test dataset.
import { defineRule } from '../server/src/engine/rule';
import { roleText, type TransformStep } from '../server/src/engine/views/data';
import { num } from '../server/src/engine/values';

/** torchvision transforms that draw random numbers on every call (besides every `Random*` class). */
const RANDOM = new Set(['ColorJitter', 'AutoAugment', 'RandAugment', 'TrivialAugmentWide', 'AugMix', 'ElasticTransform', 'ScaleJitter',
  'MixUp', 'CutMix', 'GaussianNoise']);

/** Is this step random on each call? A probability of 0, or a blur with one fixed sigma, is not. */
function isRandom(s: TransformStep): boolean {
  const v = s.value;
  if (s.name === 'GaussianBlur') {
    const sigma = v.args[1] ?? v.kwargs.get('sigma');
    if (!sigma) return true;
    if (num(sigma) !== undefined) return false;
    if (sigma.t === 'list' && sigma.items.length === 2) {
      const [a, b] = sigma.items.map(num);
      return a === undefined || b === undefined || a !== b;
    }
    return false;
  }
  if (!s.name.startsWith('Random') && !RANDOM.has(s.name)) return false;
  const p = v.kwargs.get('p') ?? (s.name === 'RandomHorizontalFlip' || s.name === 'RandomVerticalFlip' || s.name === 'RandomGrayscale' ? v.args[0] : undefined);
  return num(p) !== 0;
}

export default defineRule({
  meta: {
    id: 'augment-on-eval-data',
    title: 'Random augmentation on evaluation data',
    family: 'data',
    level: 'warning',
    frameworks: ['torchvision'],
    summary: 'A random crop, flip, colour jitter or other random augmentation in the transform of a validation or test dataset.',
    fix: 'none',
    sources: [
      'torchvision documentation, transforms: RandomResizedCrop, RandomHorizontalFlip, ColorJitter draw new random parameters on every call',
      'Measured in test/oracle/section-c.test.ts: an evaluation transform with RandomResizedCrop gives two different tensors for the same image',
    ],
    messages: {
      random:
        '`{step}` in the transform of `{dataset}` ({why}) is random: each evaluation sees another version of the same image, so the score changes from run to run and does not measure the model on the images themselves. Use deterministic steps for evaluation (e.g. Resize and CenterCrop).',
    },
  },
  check(ctx) {
    const data = ctx.views.data;
    for (const u of data.forFile(ctx.path).datasets) {
      if (u.role?.part !== 'holdout' || u.overridden || !u.transform) continue;
      for (const s of u.transform.steps) {
        if (!s.site || !isRandom(s)) continue;
        ctx.report({
          messageId: 'random',
          data: { step: s.name, dataset: u.label, why: roleText(u.role) },
          path: s.site.path,
          span: s.site.call.span,
          related: [{ path: u.path, span: u.span, message: 'the evaluation dataset built with this transform' }],
        });
      }
    }
  },
});
