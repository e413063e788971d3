// dropout-feeds-batchnorm: a dropout whose output reaches a BatchNorm with no other normalization between.
import { defineRule } from '../server/src/engine/rule';
import type { CallExpr, Span } from '../server/src/engine/ir';
import type { Related } from '../server/src/engine/types';
import { CHANNEL_PRESERVING_FUNCTIONS, NORM_FAMILIES } from '../server/src/engine/torch-catalog';
import { pyRepr } from '../server/src/engine/values';
import { FUNCTIONAL_DROPOUTS } from '../server/src/engine/views/functional-dropout';
import { isForwardCall, ModelGraphs, tensorCallName, type FlowNode, type Layer, type ModelGraph } from '../server/src/engine/views/model-graph';
import { layerLabel, layerLine, lineRef, onePerSite, siteKey, type SiteFinding } from './util';

interface Cand extends SiteFinding {
  data: { drop: string; line: string; bn: string; bnLine: string; via: string };
  path: string;
  span: Span;
  related: Related[];
}

/** Calls a path goes on through: element-wise ops, pooling, dropout, and reshapes that keep the values. */
const PASS_CALLS = new Set([
  ...CHANNEL_PRESERVING_FUNCTIONS,
  'torch.flatten', 'torch.cat', 'torch.concat',
  ...['flatten', 'view', 'reshape', 'contiguous', 'squeeze', 'unsqueeze', 'relu', 'relu_', 'sigmoid', 'tanh', 'float'].map((m) => `tensor.${m}`),
]);

/** Layers a path goes on through: weights, activations, pooling, reshapes and other dropout; not norms or unknowns. */
const PASS_FAMILIES = new Set(['conv', 'convtranspose', 'linear', 'activation', 'selu', 'pool', 'shape', 'dropout', 'alphadropout']);

export default defineRule({
  meta: {
    id: 'dropout-feeds-batchnorm',
    title: 'Dropout before BatchNorm',
    family: 'model',
    level: 'warning',
    frameworks: ['pytorch'],
    summary: 'A dropout\'s output reaches a BatchNorm with no other normalization between, so the running variance BN learns in training includes dropout noise that is gone at evaluation (variance shift).',
    fix: 'none',
    sources: [
      'Li, Chen, Hu & Yang, "Understanding the Disharmony between Dropout and Batch Normalization by Variance Shift", CVPR 2019',
      'PyTorch docs: torch.nn.Dropout (kept units scaled by 1/(1-p) in training, identity in eval), torch.nn.BatchNorm2d (running estimates used in eval)',
    ],
    messages: {
      feeds:
        '{drop} ({line}) feeds {bn} ({bnLine}){via} with no other normalization between. In training BN estimates its running variance from activations that carry dropout\'s extra variance (kept units are scaled by 1/(1-p)); in eval dropout is off, the variance is smaller, and BN normalises with statistics that no longer fit (variance shift). Move the dropout after the last BatchNorm, e.g. just before the classifier.',
    },
  },
  check(ctx) {
    for (const c of onePerSite(ctx, candidates)) ctx.report({ messageId: 'feeds', data: c.data, path: c.path, span: c.span, related: c.related });
  },
});

function nodeLabel(n: FlowNode): string {
  if (!isForwardCall(n)) return layerLabel(n);
  const q = tensorCallName(n) ?? '?';
  return `\`${q.replace('torch.nn.functional.', 'F.').replace('tensor.', 'Tensor.')}\``;
}

function through(n: FlowNode): boolean {
  if (isForwardCall(n)) return PASS_CALLS.has(tensorCallName(n) ?? '');
  return PASS_FAMILIES.has(n.family) && !NORM_FAMILIES.has(n.family);
}

function firstBatchNorm(g: ModelGraph, start: FlowNode): { layer: Layer; via: FlowNode[] } | undefined {
  return ModelGraphs.downstream(g, start, through).find((r) => r.layer.family === 'batchnorm' || r.layer.family === 'syncbatchnorm');
}

function viaText(via: FlowNode[]): string {
  if (!via.length) return '';
  const shown = via.slice(0, 3).map(nodeLabel).join(', ');
  return ` through ${shown}${via.length > 3 ? ` and ${via.length - 3} more` : ''}`;
}

function candidates(g: ModelGraph): Cand[] {
  const out: Cand[] = [];
  for (const l of g.layers) {
    if ((l.family !== 'dropout' && l.family !== 'alphadropout') || !l.site) continue;
    const hit = firstBatchNorm(g, l);
    if (!hit) continue;
    out.push({
      key: siteKey(l.site.path, l.site.call),
      sitePath: l.site.path,
      data: { drop: `${layerLabel(l)} (p=${pyRepr(l.inst.args.get('p'))})`, line: layerLine(l), bn: layerLabel(hit.layer), bnLine: layerLine(hit.layer), via: viaText(hit.via) },
      path: l.site.path,
      span: l.site.call.span,
      related: hit.layer.site ? [{ path: hit.layer.site.path, span: hit.layer.site.call.span, message: `${layerLabel(hit.layer)} normalises the dropped-out activations here` }] : [],
    });
  }
  // a functional dropout in a loop is evaluated once per pass: the first pass that reaches a BatchNorm speaks for it
  const done = new Set<CallExpr>();
  for (const c of g.calls) {
    const q = tensorCallName(c);
    if (!q || !FUNCTIONAL_DROPOUTS.has(q) || done.has(c.call)) continue;
    const hit = firstBatchNorm(g, c);
    if (!hit) continue;
    done.add(c.call);
    out.push({
      key: siteKey(c.path, c.call),
      sitePath: c.path,
      data: { drop: `\`${q.replace('torch.nn.functional.', 'F.')}\``, line: lineRef(c.path, c.call.span.line), bn: layerLabel(hit.layer), bnLine: layerLine(hit.layer), via: viaText(hit.via) },
      path: c.path,
      span: c.call.span,
      related: hit.layer.site ? [{ path: hit.layer.site.path, span: hit.layer.site.call.span, message: `${layerLabel(hit.layer)} normalises the dropped-out activations here` }] : [],
    });
  }
  return out;
}
