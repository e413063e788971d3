// norm-refit-on-holdout: a scaler fitted (again) on validation or test rows instead of reusing the training fit.
import { defineRule } from '../server/src/engine/rule';
import { roleText } from '../server/src/engine/views/data';

export default defineRule({
  meta: {
    id: 'norm-refit-on-holdout',
    title: 'Scaler fitted on held-out data',
    family: 'data',
    level: 'warning',
    frameworks: ['sklearn'],
    summary: 'fit, fit_transform or partial_fit of a scaler or imputer on validation or test rows, so they are scaled by their own statistics instead of the training ones.',
    fix: 'safe',
    sources: [
      'scikit-learn user guide, "Common pitfalls and recommended practices", section "Inconsistent preprocessing" (transform the test split with the preprocessing fitted on the training split)',
    ],
    messages: {
      refit:
        '`{fit}` ({fitPlace}) fits {estimator} on `{data}`, {why}: the held-out rows are scaled by their own statistics, so any shift between training and held-out data is erased and the score no longer reflects inputs prepared as in training. Use `transform` with the scaler fitted on the training part.',
      refitByName:
        '`{fit}` ({fitPlace}) fits {estimator} on `{data}`, {why} (no split was seen): the held-out rows are scaled by their own statistics, so any shift between training and held-out data is erased and the score no longer reflects inputs prepared as in training. Use `transform` with the scaler fitted on the training part.',
    },
  },
  check(ctx) {
    const data = ctx.views.data;
    for (const h of data.forFile(ctx.path).holdoutFits) {
      const f = h.fit;
      const t = h.trainFit;
      const canFix = f.kind === 'fit_transform' && t && f.receiverName && f.methodSpan;
      ctx.report({
        messageId: h.role.by === 'name' ? 'refitByName' : 'refit',
        data: {
          fit: f.text,
          fitPlace: data.place(f.path, f.call.span.line),
          estimator: f.estimator,
          data: f.dataText,
          why: h.role.by === 'name' ? roleText(h.role) : `the held-out part of \`${h.role.split?.label ?? '?'}\` (${h.role.split ? data.place(h.role.split.path, h.role.split.span.line) : '?'})`,
        },
        path: f.path,
        span: f.call.span,
        related: t ? [{ path: t.path, span: t.call.span, message: `\`${t.receiverName}\` is fitted on the training part here` }] : [],
        fixes: canFix
          ? [{ title: `Use \`${f.receiverName}.transform(...)\`: keep the training fit`, kind: 'safe', edits: [ctx.edit(f.path, f.methodSpan!.start, f.methodSpan!.end, 'transform')] }]
          : [],
      });
    }
  },
});
