// norm-channel-mismatch: a norm layer whose declared channels or expected input rank differ from what forward feeds it.
import { defineRule } from '../server/src/engine/rule';
import type { Span } from '../server/src/engine/ir';
import type { Fix, Related, TextEdit } from '../server/src/engine/types';
import { num, truthy } from '../server/src/engine/values';
import { layerSpec } from '../server/src/engine/torch-catalog';
import { callArg, type Layer, type ModelGraph, type ModelGraphs } from '../server/src/engine/views/model-graph';
import { layerLabel, layerLine, layerShortType, onePerSite, replaceExpr, siteKey, type SiteFinding } from './util';

type Cand = SiteFinding & (
  | { messageId: 'channels'; data: { type: string; layer: string; param: string; declared: number; incoming: number; source: string; error: string } }
  | { messageId: 'rank'; data: { type: string; layer: string; expects: string; got: string; source: string; error: string; better: string } }
) & { path: string; span: Span; edit?: TextEdit; fixTitle?: string; related: Related[] };

/** How many dimensions (N, C, *spatial) each BatchNorm accepts, and the input it names (torch/nn/modules/batchnorm.py). */
const BN_RANKS: Record<string, { ok: number[]; expects: string }> = {
  'torch.nn.BatchNorm1d': { ok: [0, 1], expects: '2-D or 3-D input (N, C) or (N, C, L)' },
  'torch.nn.BatchNorm2d': { ok: [2], expects: '4-D input (N, C, H, W)' },
  'torch.nn.BatchNorm3d': { ok: [3], expects: '5-D input (N, C, D, H, W)' },
};
const BN_FOR_RANK: Record<number, string> = { 0: 'BatchNorm1d', 1: 'BatchNorm1d', 2: 'BatchNorm2d', 3: 'BatchNorm3d' };

export default defineRule({
  meta: {
    id: 'norm-channel-mismatch',
    title: 'Norm layer sized for other channels or another input rank',
    family: 'model',
    level: 'error',
    frameworks: ['pytorch'],
    summary: 'A BatchNorm/GroupNorm/InstanceNorm declares a channel count that differs from the channels forward feeds it, or a BatchNorm of one rank receives input of another (BatchNorm2d after a Linear, BatchNorm1d after a 2-D conv); forward raises.',
    fix: 'suggested',
    sources: [
      'PyTorch docs and torch/nn/modules/batchnorm.py (_check_input_dim: "expected 4D input (got 2D input)"), torch/nn/functional.py batch_norm / group_norm shape checks',
    ],
    messages: {
      channels:
        '{type} `{layer}` declares {param}={declared}, but forward feeds it {incoming} channels ({source}); {error}',
      rank:
        '{type} `{layer}` expects {expects} but receives {got} ({source}); forward raises ValueError "{error}". {better} fits this input.',
    },
  },
  check(ctx) {
    const models = ctx.views.models;
    const found = onePerSite(ctx, (g) => candidates(g, models));
    for (const c of found) {
      const fixes: Fix[] = c.edit ? [{ title: c.fixTitle!, kind: 'suggested', edits: [c.edit] }] : [];
      if (c.messageId === 'channels') ctx.report({ messageId: 'channels', data: c.data, path: c.path, span: c.span, related: c.related, fixes });
      else ctx.report({ messageId: 'rank', data: c.data, path: c.path, span: c.span, related: c.related, fixes });
    }
  },
});

function sourceOf(l: Layer): { text: string; related: Related[] } {
  const from = l.input?.from ?? [];
  if (from.length === 1) {
    const p = from[0];
    return { text: `the output of ${layerLabel(p)} at ${layerLine(p)}`, related: p.site ? [{ path: p.site.path, span: p.site.call.span, message: `${layerLabel(p)} produces the input here` }] : [] };
  }
  return { text: 'as traced through forward', related: [] };
}

function candidates(g: ModelGraph, models: ModelGraphs): Cand[] {
  const out: Cand[] = [];
  for (const l of g.layers) {
    const site = l.site;
    if (!site || !l.input) continue;
    const isGN = l.family === 'groupnorm';
    if (!isGN && l.family !== 'batchnorm' && l.family !== 'syncbatchnorm' && l.family !== 'instancenorm') continue;
    const key = siteKey(site.path, site.call);
    const { text: source, related } = sourceOf(l);
    const base = { key, sitePath: site.path, path: site.path, span: site.call.span, related };
    // rank first: a BatchNorm of the wrong rank raises before its channels are looked at
    const ranks = BN_RANKS[l.type];
    const rank = l.input.rank;
    if (ranks && rank !== undefined && !ranks.ok.includes(rank)) {
      const dims = rank + 2;
      const better = BN_FOR_RANK[rank];
      const canRename = better && site.call.fn.k === 'attr' && models.calleeOwner(site.path, site.call) === 'torch.nn';
      out.push({
        ...base,
        messageId: 'rank',
        data: {
          type: layerShortType(l.type), layer: l.name, expects: ranks.expects, got: `${dims}-D input`, source,
          error: l.type === 'torch.nn.BatchNorm1d' ? `expected 2D or 3D input (got ${dims}D input)` : `expected ${ranks.ok[0] + 2}D input (got ${dims}D input)`,
          better: better ? `nn.${better}` : 'A norm of the input\'s rank',
        },
        edit: canRename && site.call.fn.k === 'attr' ? { path: site.path, start: site.call.fn.attrSpan.start, end: site.call.fn.attrSpan.end, newText: better } : undefined,
        fixTitle: `Use nn.${better}`,
      });
      continue;
    }
    const param = isGN ? 'num_channels' : 'num_features';
    const declared = num(l.inst.args.get(param));
    const incoming = l.input.ch;
    if (declared === undefined || incoming === undefined || declared === incoming) continue;
    const affine = truthy(l.inst.args.get('affine'));
    const running = truthy(l.inst.args.get('track_running_stats'));
    // the declared count only matters through the affine parameters or the running statistics (InstanceNorm's
    // defaults have neither, and then it normalises any channel count)
    if (affine !== true && running !== true) continue;
    const error = isGN
      ? 'forward raises RuntimeError (the affine weight has one entry per declared channel).'
      : l.family === 'instancenorm'
        ? 'forward raises RuntimeError (its affine weight or running statistics have one entry per declared channel).'
        : `forward raises RuntimeError "running_mean should contain ${incoming} elements not ${declared}".`;
    // the fix rewrites the literal channel count at the constructor call
    const idx = layerSpec(l.type)?.params.findIndex((p) => p.name === param) ?? -1;
    const arg = callArg(site.call, idx, param);
    let edit: TextEdit | undefined;
    if (arg.given === 'yes' && arg.expr.k === 'num' && arg.expr.value === declared) {
      const groups = num(l.inst.args.get('num_groups'));
      if (!isGN || (groups !== undefined && incoming % groups === 0)) edit = replaceExpr(site.path, arg.expr, String(incoming));
    }
    out.push({
      ...base,
      messageId: 'channels',
      data: { type: layerShortType(l.type), layer: l.name, param, declared, incoming, source, error },
      edit,
      fixTitle: `Use ${param}=${incoming}`,
    });
  }
  return out;
}
