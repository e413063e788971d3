// functional-dropout-always-on: F.dropout* in a module's forward without `training=`, so it keeps dropping after eval().
import { dottedName } from '../server/src/engine/ir';
import { defineRule } from '../server/src/engine/rule';
import { num } from '../server/src/engine/values';
import { functionalDropoutsIn } from '../server/src/engine/views/functional-dropout';
import { kwargEdit, pyNumber } from './util';

export default defineRule({
  meta: {
    id: 'functional-dropout-always-on',
    title: 'Functional dropout that stays on after eval()',
    family: 'model',
    level: 'warning',
    frameworks: ['pytorch'],
    summary: 'A torch.nn.functional dropout call in forward without `training=`: its default training=True ignores the module mode, so it keeps dropping at evaluation.',
    fix: 'safe',
    sources: [
      'PyTorch docs: torch.nn.functional.dropout (training=True by default), torch.nn.Module.eval',
    ],
    messages: {
      alwaysOn:
        '`{fn}` in `{method}` has no `training=` argument, so it uses its default training=True and keeps zeroing {rate} of the activations after `.eval()`: evaluation and inference stay random. Pass training={self}.training.',
    },
  },
  check(ctx) {
    const seen = new Set<number>();
    for (const d of functionalDropoutsIn(ctx.views.models, ctx.path)) {
      if (d.alpha || d.training !== 'no' || !d.method || d.path !== ctx.path || seen.has(d.call.span.start)) continue;
      seen.add(d.call.span.start);
      const p = num(d.p);
      const edit = kwargEdit(ctx.textOf(d.path), d.path, d.call, 'training', `${d.method.selfName}.training`);
      ctx.report({
        messageId: 'alwaysOn',
        data: {
          fn: dottedName(d.call.fn) ?? d.q,
          method: `${d.method.fn.owner?.name ?? '?'}.${d.method.fn.name}`,
          rate: p !== undefined ? `${pyNumber(p * 100)}% (p=${pyNumber(p)})` : 'a fraction',
          self: d.method.selfName,
        },
        path: d.path,
        span: d.call.span,
        fixes: edit ? [{ title: `Pass training=${d.method.selfName}.training`, kind: 'safe', edits: [edit] }] : [],
      });
    }
  },
});
