// norm-momentum-convention: a PyTorch norm momentum that reads like a Keras/Flax momentum (the conventions are mirrored).
import { defineRule } from '../server/src/engine/rule';
import type { Span } from '../server/src/engine/ir';
import type { Fix, Related } from '../server/src/engine/types';
import { num, originOf, truthy } from '../server/src/engine/values';
import type { ModelGraph } from '../server/src/engine/views/model-graph';
import { layerShortType, lineRef, onePerSite, pyNumber, siteKey, type SiteFinding } from './util';

interface Cand extends SiteFinding {
  data: { type: string; layer: string; m: string; where: string; pct: string; inv: string };
  path: string;
  span: Span;
  fix?: { path: string; span: Span; text: string };
  related: Related[];
}

export default defineRule({
  meta: {
    id: 'norm-momentum-convention',
    title: 'Norm momentum in the other framework\'s convention',
    family: 'model',
    level: 'warning',
    frameworks: ['pytorch'],
    summary: 'A PyTorch BatchNorm/SyncBatchNorm/InstanceNorm momentum above 0.5: PyTorch weights the new batch by m, Keras and Flax weight the old average by m, so a value copied from Keras (0.99) makes the running statistics follow the last batch.',
    fix: 'safe',
    sources: [
      'PyTorch docs and torch/nn/modules/batchnorm.py: running = (1 - momentum) * running + momentum * batch, default 0.1; momentum=None is a cumulative average',
      'Keras keras/src/layers/normalization/batch_normalization.py: moving = momentum * moving + (1 - momentum) * batch, default 0.99; Flax flax/linen/normalization.py BatchNorm default 0.99, same convention',
    ],
    messages: {
      convention:
        '{type} `{layer}` has momentum={m}{where}. In PyTorch momentum is the weight of each new batch (running = (1 - m) * running + m * batch), so every batch contributes {pct}% and the running statistics follow the last few batches. Read the Keras/Flax way (moving = m * moving + (1 - m) * batch) it would keep {pct}% of the old average; that meaning is momentum={inv} in PyTorch.',
    },
  },
  check(ctx) {
    const found = onePerSite(ctx, (g) => candidates(g, ctx.textOf));
    for (const c of found) {
      const fixes: Fix[] = c.fix ? [{ title: `Use momentum=${c.data.inv} (PyTorch convention)`, kind: 'safe', edits: [{ path: c.fix.path, start: c.fix.span.start, end: c.fix.span.end, newText: c.fix.text }] }] : [];
      ctx.report({ messageId: 'convention', data: c.data, path: c.path, span: c.span, related: c.related, fixes });
    }
  },
});

function candidates(g: ModelGraph, textOf: (p: string) => string): Cand[] {
  const out: Cand[] = [];
  for (const l of g.layers) {
    if (l.family !== 'batchnorm' && l.family !== 'syncbatchnorm' && l.family !== 'instancenorm') continue;
    const site = l.site;
    const v = l.inst.args.get('momentum');
    const m = num(v);
    // momentum only matters when running statistics are kept (InstanceNorm keeps none by default); 0.5 reads the
    // same in both conventions, so only values above it can be the other framework's
    if (!site || v?.t !== 'num' || m === undefined || m <= 0.5 || m >= 1 || truthy(l.inst.args.get('track_running_stats')) !== true) continue;
    const inv = pyNumber(1 - m);
    const origin = originOf(v);
    const inSite = origin?.span && origin.path === site.path && origin.span.start >= site.call.span.start && origin.span.end <= site.call.span.end;
    const where = origin && !inSite ? ` (${origin.what ? `${origin.what}, ` : ''}set at ${lineRef(origin.path, origin.line)})` : '';
    // the fix rewrites the literal the value came from, only when it is that plain number
    let fix: Cand['fix'];
    if (origin?.span) {
      const lit = textOf(origin.path).slice(origin.span.start, origin.span.end);
      if (lit.trim() === lit && lit !== '' && Number(lit) === m) fix = { path: origin.path, span: origin.span, text: inv };
    }
    out.push({
      key: siteKey(site.path, site.call),
      sitePath: site.path,
      data: { type: layerShortType(l.type), layer: l.name, m: pyNumber(m), where, pct: pyNumber(+(m * 100).toFixed(4)), inv },
      path: site.path,
      span: site.call.span,
      fix,
      related: origin?.span && !inSite ? [{ path: origin.path, span: origin.span, message: `momentum=${pyNumber(m)} comes from here` }] : [],
    });
  }
  return out;
}
