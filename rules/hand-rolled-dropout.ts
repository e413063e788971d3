// hand-rolled-dropout: a random keep mask multiplied into activations without the 1/(1-p) rescale or a training gate.
import { defineRule } from '../server/src/engine/rule';
import { maskApplicationsIn } from '../server/src/engine/views/masks';

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
    for (const a of maskApplicationsIn(ctx.views.models, ctx.views.interp, ctx.path)) {
      if (a.rescaled && a.gated) continue;
      const fn = a.fn.owner ? `${a.fn.owner.name}.${a.fn.name}` : a.fn.name;
      ctx.report({
        messageId: !a.rescaled && !a.gated ? 'neither' : !a.rescaled ? 'noRescale' : 'notGated',
        data: { fn },
        path: a.path,
        span: a.span,
        related: [{ path: a.path, span: a.maskSpan, message: 'the random mask' }],
      });
    }
  },
});
