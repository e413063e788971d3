// selu-with-batchnorm: BatchNorm inside a self-normalising SELU network.
import { defineRule } from '../server/src/engine/rule';
import { activationProfile } from '../server/src/engine/views/activations';
import type { ModelGraph } from '../server/src/engine/views/model-graph';
import { layerLine, layerShortType, lineRef, onePerSite, siteKey, type SiteFinding } from './util';

interface Cand extends SiteFinding {
  data: { type: string; layer: string; line: string; model: string; selu: string };
  span: { path: string; span: import('../server/src/engine/ir').Span };
}

export default defineRule({
  meta: {
    id: 'selu-with-batchnorm',
    title: 'BatchNorm in a SELU network',
    family: 'model',
    level: 'info',
    frameworks: ['pytorch'],
    summary: 'A self-normalising (SELU) network also uses BatchNorm, which is redundant with self-normalisation and brings back the batch-size and train/eval dependence SELU networks are chosen to avoid.',
    fix: 'none',
    sources: [
      'Klambauer, Unterthiner, Mayr & Hochreiter, "Self-Normalizing Neural Networks", NeurIPS 2017 (SELU keeps activations near zero mean and unit variance without explicit normalization)',
      'PyTorch docs: torch.nn.BatchNorm1d (batch statistics in training, running estimates in eval)',
    ],
    messages: {
      batchnorm:
        '{type} `{layer}` ({line}) sits in the SELU network `{model}` ({selu}). SELU already pulls activations towards zero mean and unit variance, so this normalization is redundant, and it brings back what self-normalising networks avoid: statistics that depend on the batch size and differ between training and eval(). Drop it, or use a ReLU-style network if you want BatchNorm.',
    },
  },
  check(ctx) {
    const found = onePerSite(ctx, (g) => candidates(g));
    for (const c of found) ctx.report({ messageId: 'batchnorm', data: c.data, path: c.span.path, span: c.span.span });
  },
});

function candidates(g: ModelGraph): Cand[] {
  const prof = activationProfile(g);
  if (!prof.seluNetwork) return [];
  const u = prof.selu[0];
  const selu = u.layer ? `SELU \`${u.layer.name}\`` : `${u.label} at ${lineRef(u.call!.path, u.call!.call.span.line)}`;
  const out: Cand[] = [];
  for (const l of g.layers) {
    if ((l.family !== 'batchnorm' && l.family !== 'syncbatchnorm') || !l.site) continue;
    out.push({
      key: siteKey(l.site.path, l.site.call),
      sitePath: l.site.path,
      data: { type: layerShortType(l.type), layer: l.name, line: layerLine(l), model: g.className, selu },
      span: { path: l.site.path, span: l.site.call.span },
    });
  }
  return out;
}
