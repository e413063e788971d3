// norm-fit-before-split: preprocessing statistics learned from rows that a later split or cross-validation holds out.
import { defineRule } from '../server/src/engine/rule';
import type { Span } from '../server/src/engine/ir';
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
    // one finding per fit: the first split it leaks into (else the cross-validation); every such place is related
    const byFit = new Map<FitEvent, { label: string; path: string; span: Span; cv: boolean }[]>();
    const add = (fit: FitEvent, w: { label: string; path: string; span: Span }, cv: boolean) => {
      const list = byFit.get(fit) ?? [];
      if (!list.some((x) => x.span.start === w.span.start && x.path === w.path)) list.push({ label: w.label, path: w.path, span: w.span, cv });
      byFit.set(fit, list);
    };
    // K-fold parts count as cross-validation: a fit on all rows transformed inside the fold loop leaks into every fold
    for (const l of d.splitLeaks) if (l.split) add(l.fit, l.split, l.split.cv);
    for (const l of d.cvLeaks) if (l.cv) add(l.fit, l.cv, true);
    for (const [fit, places] of byFit) {
      const first = places[0];
      const messageId = fit.kind === 'stats' ? (first.cv ? 'statsCv' : 'stats') : first.cv ? 'cv' : 'split';
      ctx.report({
        messageId,
        data: {
          fit: fit.text,
          fitPlace: data.place(fit.path, fit.call.span.line),
          estimator: fit.estimator,
          data: fit.dataText,
          split: first.label,
          splitPlace: data.place(first.path, first.span.line),
        },
        path: fit.path,
        span: fit.call.span,
        related: places.map((w) => ({ path: w.path, span: w.span, message: w.cv ? 'cross-validation over rows the fit has seen' : 'a split that holds out rows the fit has seen' })),
      });
    }
  },
});
