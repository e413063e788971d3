// eval-transform-mismatch: the training transform normalizes, the evaluation transform does not or uses other constants.
import { defineRule } from '../server/src/engine/rule';
import { normalizeConstants, roleText, type DatasetUse, type TransformStep } from '../server/src/engine/views/data';
import { pyNumber } from './util';

const vec = (xs: number[]) => `(${xs.map(pyNumber).join(', ')})`;
const same = (a: number[], b: number[]) => a.length === b.length && a.every((x, i) => Math.abs(x - b[i]) <= 1e-12 * Math.max(1, Math.abs(x)));

export default defineRule({
  meta: {
    id: 'eval-transform-mismatch',
    title: 'Evaluation transform normalizes differently from training',
    family: 'data',
    level: 'warning',
    frameworks: ['torchvision'],
    summary: 'The training dataset\'s transform ends in Normalize, but the validation or test dataset\'s transform has no Normalize, or one with other mean/std constants.',
    fix: 'none',
    sources: [
      'torchvision documentation, transforms.Normalize: output[c] = (input[c] - mean[c]) / std[c]',
    ],
    messages: {
      missing:
        'The transform of `{dataset}` ({why}) has no Normalize, but the training transform of `{trainDataset}` normalizes with mean={mean}, std={std} ({trainPlace}): the model is evaluated on inputs on another scale than it was trained on. Add the same Normalize step.',
      constants:
        'The transform of `{dataset}` ({why}) normalizes with mean={evalMean}, std={evalStd}, but the training transform of `{trainDataset}` uses mean={mean}, std={std} ({trainPlace}): the model is evaluated on inputs on another scale than it was trained on. Use the training constants.',
    },
  },
  check(ctx) {
    const data = ctx.views.data;
    const all = data.forFile(ctx.path).datasets.filter((u) => u.transform?.complete && !u.overridden);
    const label = (u: DatasetUse) => u.label;
    const norms = (u: DatasetUse): TransformStep[] => u.transform!.steps.filter((s) => s.name === 'Normalize');
    for (const ev of all) {
      if (ev.role?.part !== 'holdout') continue;
      const site = ev.transform!.site;
      if (!site) continue;
      const trains = all.filter((u) => u.role?.part === 'train' && u.body === ev.body && norms(u).length === 1);
      if (!trains.length) continue;
      const tr = trains[0];
      const tn = norms(tr)[0];
      const tc = normalizeConstants(tn);
      const en = norms(ev);
      const base = { dataset: label(ev), why: roleText(ev.role), trainDataset: label(tr), trainPlace: tn.site ? data.place(tn.site.path, tn.site.call.span.line) : '?' };
      if (!en.length) {
        if (!tc) continue;
        ctx.report({ messageId: 'missing', data: { ...base, mean: vec(tc.mean), std: vec(tc.std) }, path: site.path, span: site.call.span,
          related: tn.site ? [{ path: tn.site.path, span: tn.site.call.span, message: 'the training transform normalizes here' }] : [] });
        continue;
      }
      const ec = en.length === 1 ? normalizeConstants(en[0]) : undefined;
      if (!ec || !tc) continue;
      // compare against every training chain of the same body: one that matches is enough
      const matches = trains.some((u) => {
        const c = normalizeConstants(norms(u)[0]);
        return !c || (same(c.mean, ec.mean) && same(c.std, ec.std));
      });
      if (matches) continue;
      ctx.report({ messageId: 'constants', data: { ...base, mean: vec(tc.mean), std: vec(tc.std), evalMean: vec(ec.mean), evalStd: vec(ec.std) },
        path: site.path, span: site.call.span,
        related: tn.site ? [{ path: tn.site.path, span: tn.site.call.span, message: 'the training transform normalizes here' }] : [] });
    }
  },
});
