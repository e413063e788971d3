// adam-coupled-weight-decay: torch.optim.Adam with weight_decay > 0 adds L2 to the gradient instead of decaying the weights.
import { defineRule } from '../server/src/engine/rule';
import { num, originOf, truthy } from '../server/src/engine/values';
import { pyNumber } from './util';

export default defineRule({
  meta: {
    id: 'adam-coupled-weight-decay',
    title: 'Adam with coupled weight decay',
    family: 'training',
    level: 'info',
    frameworks: ['pytorch'],
    summary: '`torch.optim.Adam(weight_decay>0)` adds the decay to the gradient, where Adam\'s per-parameter scaling weakens it; AdamW applies it to the weights directly.',
    fix: 'suggested',
    sources: [
      'Loshchilov & Hutter, "Decoupled Weight Decay Regularization", ICLR 2019',
      'PyTorch docs: torch.optim.Adam (weight_decay adds lambda*theta to the gradient), torch.optim.AdamW (default weight_decay=1e-2)',
    ],
    messages: {
      coupled:
        'Adam with weight_decay={wd} adds the decay to the gradient, so Adam\'s per-parameter scaling shrinks it where gradients are large (Loshchilov & Hutter 2019). AdamW decouples it from the gradient, but its decay is not the same number: AdamW\'s default is 1e-2, so re-tune weight_decay after switching.',
    },
  },
  check(ctx) {
    for (const o of ctx.views.training.optimizers) {
      if (o.path !== ctx.path || o.type !== 'torch.optim.Adam') continue;
      const wd = num(o.weightDecay);
      if (wd === undefined || wd <= 0) continue;
      if (o.decoupled && truthy(o.decoupled) !== false) continue;
      const fn = o.call.fn;
      const origin = originOf(o.weightDecay);
      const fixes = fn.k === 'attr'
        ? [{ title: 'Use AdamW (re-tune weight_decay)', kind: 'suggested' as const, edits: [ctx.edit(o.path, fn.attrSpan.start, fn.attrSpan.end, 'AdamW')] }]
        : [];
      ctx.report({
        messageId: 'coupled',
        data: { wd: pyNumber(wd) },
        path: o.path,
        span: o.call.span,
        related: origin?.span && origin.path !== o.path ? [{ path: origin.path, span: origin.span, message: 'weight_decay set here' }] : [],
        fixes,
      });
    }
  },
});
