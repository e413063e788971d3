// scaled-before-cv: features scaled on all rows and then cross-validated, where a Pipeline would fit per fold.
import { defineRule } from '../server/src/engine/rule';

export default defineRule({
  meta: {
    id: 'scaled-before-cv',
    title: 'Pre-scaled features passed to cross-validation',
    family: 'data',
    level: 'warning',
    frameworks: ['sklearn'],
    summary: 'Features scaled with statistics of all rows are passed to cross_val_score, a search such as GridSearchCV, or a K-fold loop, instead of scaling inside each fold with a Pipeline.',
    fix: 'none',
    sources: [
      'scikit-learn user guide, "Common pitfalls and recommended practices", section "Data leakage" (use a Pipeline inside cross-validation)',
      'scikit-learn user guide, "Pipelines and composite estimators"',
    ],
    messages: {
      prescaled:
        '`{data}` is scaled by `{fit}` ({fitPlace}) on all its rows before `{cv}` ({cvPlace}) cross-validates it, so each validation fold was scaled with its own rows in the statistics. Pass the unscaled features and a pipeline instead, e.g. `make_pipeline({scaler}, model)`.',
      prescaledStats:
        '`{data}` is normalized with the mean/std from `{fit}` ({fitPlace}), taken over all its rows, before `{cv}` ({cvPlace}) cross-validates it, so each validation fold was scaled with its own rows in the statistics. Pass the unscaled features and a pipeline instead, e.g. `make_pipeline({scaler}, model)`.',
    },
  },
  check(ctx) {
    const data = ctx.views.data;
    for (const l of data.forFile(ctx.path).cvLeaks) {
      if (!l.cv) continue;
      const f = l.fit;
      ctx.report({
        messageId: f.kind === 'stats' ? 'prescaledStats' : 'prescaled',
        data: {
          data: f.dataText,
          fit: f.text,
          fitPlace: data.place(f.path, f.call.span.line),
          cv: l.cv.label,
          cvPlace: data.place(l.cv.path, l.cv.span.line),
          scaler: f.kind === 'stats' || f.estimator.startsWith('Pipeline(') ? 'StandardScaler()' : `${f.estimator}()`,
        },
        path: f.path,
        span: f.call.span,
        related: [{ path: l.cv.path, span: l.cv.span, message: 'cross-validation of the pre-scaled features' }],
      });
    }
  },
});
