// norm-fit-before-split: preprocessing statistics learned from rows that a later split or cross-validation holds out.
import { defineRule } from '../server/src/engine/rule';
import type { FitEvent } from '../server/src/engine/views/data';

export default defineRule({
  meta: {
    id: 'norm-fit-before-split',
    title: 'Normalization fitted before the data is split',
    family: 'data',
    level: 'warning',
    frameworks: ['sklearn', 'pytorch'],
    summary: 'A scaler, imputer or hand-written mean/std learns its statistics from all rows, and the same rows are split into training and held-out parts (or cross-validated) afterwards.',
    fix: 'none',
    sources: [
      'scikit-learn user guide, "Common pitfalls and recommended practices", section "Data leakage"',
      'Kaufman, Rosset, Perlich, Stitelman, "Leakage in Data Mining: Formulation, Detection, and Avoidance", ACM TKDD 2012',
    ],
    messages: {
      split:
        '`{fit}` ({fitPlace}) fits {estimator} on all rows of `{data}`, and `{split}` ({splitPlace}) holds part of those rows out afterwards: the held-out rows already shaped the statistics, so the held-out score overstates how the model does on data it has never seen. Split first and fit on the training part only, or put {estimator} in a Pipeline.',
      cv:
        '`{fit}` ({fitPlace}) fits {estimator} on all rows of `{data}`, which `{split}` ({splitPlace}) then cross-validates: every validation fold already shaped the statistics, so the cross-validated score overstates how the model does on data it has never seen. Fit {estimator} inside each fold with a Pipeline.',
      stats:
        'The mean/std statistics from `{fit}` ({fitPlace}) are taken over all rows of `{data}` and normalize it before `{split}` ({splitPlace}) holds part of it out: the held-out rows already shaped the statistics, so the held-out score overstates how the model does on data it has never seen. Compute them on the training part after the split.',
      statsCv:
        'The mean/std statistics from `{fit}` ({fitPlace}) are taken over all rows of `{data}`, which `{split}` ({splitPlace}) then cross-validates: every validation fold already shaped the statistics, so the cross-validated score overstates how the model does on data it has never seen. Compute them inside each fold, or use a StandardScaler in a Pipeline.',
    },
  },
  check(ctx) {
    const data = ctx.views.data;
    const d = data.forFile(ctx.path);
    const report = (fit: FitEvent, where: { label: string; path: string; span: typeof fit.call.span }, cv: boolean) => {
      const messageId = fit.kind === 'stats' ? (cv ? 'statsCv' : 'stats') : cv ? 'cv' : 'split';
      ctx.report({
        messageId,
        data: {
          fit: fit.text,
          fitPlace: data.place(fit.path, fit.call.span.line),
          estimator: fit.estimator,
          data: fit.dataText,
          split: where.label,
          splitPlace: data.place(where.path, where.span.line),
        },
        path: fit.path,
        span: fit.call.span,
        related: [{ path: where.path, span: where.span, message: cv ? 'cross-validation over rows the fit has seen' : 'the split that holds out rows the fit has seen' }],
      });
    };
    for (const l of d.splitLeaks) if (l.split && !l.split.cv) report(l.fit, l.split, false);
    for (const l of d.cvLeaks) if (l.cv) report(l.fit, l.cv, true);
  },
});
