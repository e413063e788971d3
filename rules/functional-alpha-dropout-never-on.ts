// functional-alpha-dropout-never-on: F.alpha_dropout / feature_alpha_dropout without `training=` (default False).
import { dottedName } from '../server/src/engine/ir';
import { defineRule } from '../server/src/engine/rule';
import { functionalDropoutsIn } from '../server/src/engine/views/functional-dropout';
import { kwargEdit } from './util';

export default defineRule({
  meta: {
    id: 'functional-alpha-dropout-never-on',
    title: 'Functional alpha dropout that never drops',
    family: 'model',
    level: 'warning',
    frameworks: ['pytorch'],
    summary: 'A torch.nn.functional alpha dropout call in forward without `training=`: its default training=False makes it the identity, in training too.',
    fix: 'safe',
    sources: [
      'PyTorch docs: torch.nn.functional.alpha_dropout, torch.nn.functional.feature_alpha_dropout (training=False by default)',
      'Klambauer et al., "Self-Normalizing Neural Networks", NeurIPS 2017 (alpha dropout)',
    ],
    messages: {
      neverOn:
        '`{fn}` in `{method}` has no `training=` argument, so it uses its default training=False and returns its input unchanged, in training too: the network is trained without this dropout. Pass training={self}.training.',
    },
  },
  check(ctx) {
    const seen = new Set<number>();
    for (const d of functionalDropoutsIn(ctx.views.models, ctx.path)) {
      if (!d.alpha || d.training !== 'no' || !d.method || d.path !== ctx.path || seen.has(d.call.span.start)) continue;
      seen.add(d.call.span.start);
      const edit = kwargEdit(ctx.textOf(d.path), d.path, d.call, 'training', `${d.method.selfName}.training`);
      ctx.report({
        messageId: 'neverOn',
        data: {
          fn: dottedName(d.call.fn) ?? d.q,
          method: `${d.method.fn.owner?.name ?? '?'}.${d.method.fn.name}`,
          self: d.method.selfName,
        },
        path: d.path,
        span: d.call.span,
        fixes: edit ? [{ title: `Pass training=${d.method.selfName}.training`, kind: 'safe', edits: [edit] }] : [],
      });
    }
  },
});
