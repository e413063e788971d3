// groupnorm-divisibility: a GroupNorm whose channel count does not split into its number of groups (raises).
import { defineRule } from '../server/src/engine/rule';
import type { Span } from '../server/src/engine/ir';
import type { TextEdit } from '../server/src/engine/types';
import { num } from '../server/src/engine/values';
import { callArg, type ModelGraph, type ModelGraphs } from '../server/src/engine/views/model-graph';
import { layerLine, onePerSite, replaceExpr, siteKey, type SiteFinding } from './util';

interface Cand extends SiteFinding {
  data: { layer: string; line: string; ch: number; groups: number; suggest: number; others: string };
  path: string;
  span: Span;
  edit?: TextEdit;
}

export default defineRule({
  meta: {
    id: 'groupnorm-divisibility',
    title: 'GroupNorm channels not divisible by groups',
    family: 'model',
    level: 'error',
    frameworks: ['pytorch'],
    summary: 'A GroupNorm whose num_channels is not a multiple of num_groups; constructing it raises ValueError.',
    fix: 'suggested',
    sources: [
      'PyTorch docs and torch/nn/modules/normalization.py: GroupNorm raises "num_channels must be divisible by num_groups"',
      'Wu & He, "Group Normalization", ECCV 2018 (32 groups as the default choice)',
    ],
    messages: {
      indivisible:
        'GroupNorm `{layer}` ({line}) splits num_channels={ch} into num_groups={groups}, but {ch} is not a multiple of {groups}: constructing it raises ValueError "num_channels must be divisible by num_groups". num_groups={suggest} divides {ch}{others}.',
    },
  },
  check(ctx) {
    const channelsAt = channelsBySite(ctx.views.models);
    for (const c of onePerSite(ctx, (g) => candidates(g, channelsAt))) {
      ctx.report({
        messageId: 'indivisible',
        data: c.data,
        path: c.path,
        span: c.span,
        fixes: c.edit ? [{ title: `Use num_groups=${c.data.suggest}`, kind: 'suggested', edits: [c.edit] }] : [],
      });
    }
  },
});

const channelsCache = new WeakMap<ModelGraphs, Map<string, number[]>>();

/**
 * One literal serves every instance built at a site (Block(96) and Block(72)): the channels of all of them, over every
 * model of the workspace. The same for every checked file, so built once per analysis (per file it was quadratic).
 */
function channelsBySite(models: ModelGraphs): Map<string, number[]> {
  const hit = channelsCache.get(models);
  if (hit) return hit;
  const channelsAt = new Map<string, number[]>();
  for (const g of models.all()) {
    for (const l of g.layers) {
      const ch = num(l.inst.args.get('num_channels'));
      if (l.family !== 'groupnorm' || !l.site || ch === undefined || !Number.isInteger(ch) || ch <= 0) continue;
      const k = siteKey(l.site.path, l.site.call);
      const list = channelsAt.get(k);
      if (list) list.push(ch);
      else channelsAt.set(k, [ch]);
    }
  }
  channelsCache.set(models, channelsAt);
  return channelsAt;
}

/** 32 groups when they divide the channels (the paper's default), else the largest divisor below 32. */
export function groupsFor(ch: number): number {
  for (let g = Math.min(32, ch); g > 1; g--) if (ch % g === 0) return g;
  return 1;
}

/** ` and the 72 channels of the other instances built here`, when the site builds several widths. */
function otherChannels(all: number[], ch: number): string {
  const others = [...new Set(all.filter((c) => c !== ch))].sort((a, b) => a - b);
  return others.length ? ` and the ${others.join(', ')} channels of the other instances built at this line` : '';
}

function gcd(a: number, b: number): number {
  return b ? gcd(b, a % b) : a;
}

function candidates(g: ModelGraph, channelsAt: Map<string, number[]>): Cand[] {
  const out: Cand[] = [];
  for (const l of g.layers) {
    const site = l.site;
    if (l.family !== 'groupnorm' || !site) continue;
    const groups = num(l.inst.args.get('num_groups'));
    const ch = num(l.inst.args.get('num_channels'));
    if (groups === undefined || ch === undefined || !Number.isInteger(groups) || !Number.isInteger(ch) || groups <= 0 || ch <= 0 || ch % groups === 0) continue;
    const key = siteKey(site.path, site.call);
    const suggest = groupsFor((channelsAt.get(key) ?? [ch]).reduce(gcd, ch));
    const arg = callArg(site.call, 0, 'num_groups');
    // rewrite only the literal at the constructor call; the other arguments (eps, affine) stay as written
    const edit = arg.given === 'yes' && arg.expr.k === 'num' && arg.expr.value === groups ? replaceExpr(site.path, arg.expr, String(suggest)) : undefined;
    out.push({
      key,
      sitePath: site.path,
      data: { layer: l.name, line: layerLine(l), ch, groups, suggest, others: otherChannels(channelsAt.get(key) ?? [], ch) },
      path: site.path,
      span: site.call.span,
      edit,
    });
  }
  return out;
}
