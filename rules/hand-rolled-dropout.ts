// hand-rolled-dropout: a random keep mask multiplied into activations without the 1/(1-p) rescale or a training gate.
import { defineRule } from '../server/src/engine/rule';
import type { Span } from '../server/src/engine/ir';
import { maskApplications, type MaskApplication } from '../server/src/engine/views/masks';

export default defineRule({
  meta: {
    id: 'hand-rolled-dropout',
    title: 'Hand-written dropout mask without rescale or training check',
    family: 'model',
    level: 'warning',
    frameworks: ['pytorch'],
    summary: 'A Bernoulli / `rand < p` mask multiplied into activations in forward without dividing the kept values by the keep probability, or without checking `self.training`, so it shrinks activations or keeps dropping at evaluation.',
    fix: 'none',
    sources: [
      'PyTorch docs: torch.nn.Dropout (kept values scaled by 1/(1-p) in training; identity in eval mode)',
      'Srivastava et al., "Dropout: A Simple Way to Prevent Neural Networks from Overfitting", JMLR 2014 (weights scaled by the retention probability at test time)',
    ],
    messages: {
      neither:
        'A random mask is multiplied into the activations in `{fn}` without dividing by the keep probability and without checking `self.training`: it shrinks their expected value by the keep probability and keeps dropping after `.eval()`. Use nn.Dropout / nn.Dropout2d, or gate it with `if self.training:` and divide by the keep probability.',
      noRescale:
        'A random mask is multiplied into the activations in `{fn}` without dividing by the keep probability: in training their expected value shrinks by that probability while evaluation sees them at full scale. Divide the product by the keep probability (inverted dropout, as nn.Dropout does).',
      notGated:
        'A random mask is multiplied into the activations in `{fn}` without checking `self.training`, so it keeps dropping after `.eval()`: evaluation and inference stay random. Gate it with `if self.training:` (or `if not self.training: return x`).',
    },
  },
  check(ctx) {
    const bySite = new Map<string, { a: MaskApplication; span: Span; rescaled: boolean; gated: boolean }>();
    // a function can run under several models (a block alone and inside a network): it is gated if any caller gates it
    for (const g of ctx.views.models.all()) {
      for (const a of maskApplications(g, ctx.views.interp)) {
        if (a.path !== ctx.path) continue;
        const key = `${a.span.start}:${a.span.end}`;
        const cur = bySite.get(key);
        if (cur) {
          cur.gated ||= a.gated;
          cur.rescaled ||= a.rescaled;
        } else bySite.set(key, { a, span: a.span, rescaled: a.rescaled, gated: a.gated });
      }
    }
    for (const { a, span, rescaled, gated } of bySite.values()) {
      if (rescaled && gated) continue;
      const fn = a.fn.owner ? `${a.fn.owner.name}.${a.fn.name}` : a.fn.name;
      ctx.report({
        messageId: !rescaled && !gated ? 'neither' : !rescaled ? 'noRescale' : 'notGated',
        data: { fn },
        path: a.path,
        span,
        related: [{ path: a.path, span: a.maskSpan, message: 'the random mask' }],
      });
    }
  },
});
