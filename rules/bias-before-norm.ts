// bias-before-norm: a Conv/Linear bias whose output goes straight into a norm that subtracts the per-channel mean.
import { defineRule } from '../server/src/engine/rule';
import { num, truthy } from '../server/src/engine/values';
import type { Layer } from '../server/src/engine/views/model-graph';
import { kwargEdit, layerShortType, lineRef } from './util';

export default defineRule({
  meta: {
    id: 'bias-before-norm',
    title: 'Bias cancelled by the normalization that follows',
    family: 'model',
    level: 'warning',
    frameworks: ['pytorch'],
    summary: 'A convolution or linear layer keeps its bias although its output goes straight into a normalization that subtracts the per-channel mean, so the bias has no effect.',
    fix: 'safe',
    sources: [
      'Ioffe & Szegedy, "Batch Normalization", ICML 2015, section 3.2 (the bias can be dropped before BN)',
      'PyTorch docs: torch.nn.BatchNorm2d, torch.nn.GroupNorm, torch.nn.InstanceNorm2d',
    ],
    messages: {
      cancelled:
        '{type} `{layer}` has a bias that {normType} `{norm}` ({normLine}) cancels: the norm subtracts the per-channel mean, so its {params} never change the output. Pass bias=False.',
    },
  },
  check(ctx) {
    for (const g of ctx.views.models.graphsIn(ctx.path)) {
      for (const [a, b] of g.flow) {
        if (!hasBias(a) || !cancelsBias(b)) continue;
        // the bias still matters where the same output is also used another way (returned, added, another layer)
        if (g.sharedOutputs.has(a) || g.flow.some(([x, y]) => x === a && !cancelsBias(y))) continue;
        const site = a.site;
        if (!site) continue;
        const count = num(a.inst.args.get(a.family === 'linear' ? 'out_features' : 'out_channels'));
        const edit = kwargEdit(ctx.textOf(site.path), site.path, site.call, 'bias', 'False');
        ctx.report({
          messageId: 'cancelled',
          data: {
            type: layerShortType(a.type),
            layer: a.name,
            normType: layerShortType(b.type),
            norm: b.name,
            normLine: b.site ? lineRef(b.site.path, b.site.call.span.line) : 'forward',
            params: count !== undefined ? `${count} bias parameters` : 'bias parameters',
          },
          path: site.path,
          span: site.call.span,
          tags: ['unnecessary'],
          related: b.site ? [{ path: b.site.path, span: b.site.call.span, message: `${layerShortType(b.type)} \`${b.name}\` removes the per-channel mean here` }] : [],
          fixes: edit ? [{ title: `Pass bias=False to \`${a.name}\``, kind: 'safe', edits: [edit] }] : [],
        });
      }
    }
  },
});

function hasBias(l: Layer): boolean {
  if (l.family !== 'conv' && l.family !== 'convtranspose' && l.family !== 'linear') return false;
  return truthy(l.inst.args.get('bias')) === true;
}

/** BatchNorm and InstanceNorm average per channel; GroupNorm only when each group is one channel. */
function cancelsBias(l: Layer): boolean {
  if (l.family === 'batchnorm' || l.family === 'syncbatchnorm' || l.family === 'instancenorm') return true;
  if (l.family === 'groupnorm') {
    const g = num(l.inst.args.get('num_groups'));
    const c = num(l.inst.args.get('num_channels'));
    return g !== undefined && c !== undefined && g === c;
  }
  return false;
}
