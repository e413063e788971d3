// alpha-dropout-without-selu: AlphaDropout in a network whose activations are ReLU-family only (no SELU to pair with).
import { defineRule, type RuleContext } from '../server/src/engine/rule';
import type { Fix } from '../server/src/engine/types';
import { pyRepr } from '../server/src/engine/values';
import { activationProfile, type ActivationUse } from '../server/src/engine/views/activations';
import { functionalDropouts } from '../server/src/engine/views/functional-dropout';
import type { ModelGraph } from '../server/src/engine/views/model-graph';
import { lineRef, onePerSite, siteKey, type SiteFinding } from './util';

const MESSAGES = {
  layer:
    '{type} `{layer}` (p={rate}) sits in `{model}`, whose activations are ReLU-family only ({acts}) with no SELU: alpha dropout drops units to SELU\'s negative saturation value (-1.758) and re-centres, which only keeps the statistics of a SELU network. Plain {plain}(p={rate}) is the usual regulariser here.',
  functional:
    '`{fn}` in forward of `{model}`, whose activations are ReLU-family only ({acts}) with no SELU: alpha dropout only keeps the statistics of a SELU network. `F.{plain}` (or its 1-D/3-D variant) is the usual regulariser here.',
} as const;
type Ctx = RuleContext<typeof MESSAGES>;

interface Cand extends SiteFinding {
  report: () => void;
}

export default defineRule({
  meta: {
    id: 'alpha-dropout-without-selu',
    title: 'AlphaDropout without SELU',
    family: 'model',
    level: 'info',
    frameworks: ['pytorch'],
    summary: 'AlphaDropout is used in a network whose activations are ReLU-family only; it is designed to preserve the self-normalising statistics of SELU and plain dropout fits other activations.',
    fix: 'suggested',
    sources: [
      'Klambauer, Unterthiner, Mayr & Hochreiter, "Self-Normalizing Neural Networks", NeurIPS 2017 (alpha dropout is derived for SELU)',
      'PyTorch docs: torch.nn.AlphaDropout ("Alpha Dropout goes hand-in-hand with SELU activation function")',
    ],
    messages: MESSAGES,
  },
  check(ctx) {
    for (const c of onePerSite(ctx, (g) => candidates(ctx, g))) c.report();
  },
});

function describeActs(uses: ActivationUse[]): string {
  const shown = uses.slice(0, 3).map((u) => (u.layer ? `${u.label} \`${u.layer.name}\`` : `${u.label} at ${lineRef(u.call!.path, u.call!.call.span.line)}`));
  return shown.join(', ') + (uses.length > 3 ? `, and ${uses.length - 3} more` : '');
}

/** FeatureAlphaDropout masks whole channels: the plain counterpart depends on the input's spatial rank. */
function plainLayer(type: string, rank: number | undefined): string | undefined {
  if (type === 'torch.nn.AlphaDropout') return 'Dropout';
  if (type === 'torch.nn.FeatureAlphaDropout' && rank !== undefined && rank >= 1 && rank <= 3) return `Dropout${rank}d`;
  return undefined;
}

function candidates(ctx: Ctx, g: ModelGraph): Cand[] {
  const prof = activationProfile(g);
  // stay quiet unless every activation is known: an opaque layer could be (or wrap) a SELU
  if (!g.traced || g.opaque.length || prof.unknownOps || prof.selu.length || !prof.reluFamily.length || prof.uses.some((u) => u.kind === 'elu-family')) return [];
  const acts = describeActs(prof.reluFamily);
  const out: Cand[] = [];
  for (const l of g.layers) {
    const site = l.site;
    if (l.family !== 'alphadropout' || !site) continue;
    const rate = pyRepr(l.inst.args.get('p'));
    const plain = plainLayer(l.type, l.input?.rank);
    out.push({
      key: siteKey(site.path, site.call),
      sitePath: site.path,
      report: () => {
        const fixes: Fix[] = [];
        if (plain && site.call.fn.k === 'attr' && ctx.views.models.calleeOwner(site.path, site.call) === 'torch.nn') {
          fixes.push({ title: `Use nn.${plain} with the same rate`, kind: 'suggested', edits: [{ path: site.path, start: site.call.fn.attrSpan.start, end: site.call.fn.attrSpan.end, newText: plain }] });
        }
        ctx.report({
          messageId: 'layer',
          data: { type: l.type.slice('torch.nn.'.length), layer: l.name, rate, model: g.className, acts, plain: plain ?? 'Dropout' },
          path: site.path,
          span: site.call.span,
          fixes,
        });
      },
    });
  }
  for (const d of functionalDropouts(g)) {
    if (!d.alpha) continue;
    const call = d.call;
    const fn = d.q.slice('torch.nn.functional.'.length);
    out.push({
      key: siteKey(d.path, call),
      sitePath: d.path,
      report: () => {
        const fixes: Fix[] = [];
        // F.alpha_dropout defaults to training=False, F.dropout to True: rename only when training= is explicit;
        // feature_alpha_dropout's plain counterpart depends on the input rank, so it gets no rename
        if (fn === 'alpha_dropout' && d.training === 'yes' && call.fn.k === 'attr' && ctx.views.models.calleeOwner(d.path, call) === 'torch.nn.functional') {
          fixes.push({ title: 'Use F.dropout', kind: 'suggested', edits: [{ path: d.path, start: call.fn.attrSpan.start, end: call.fn.attrSpan.end, newText: 'dropout' }] });
        }
        ctx.report({ messageId: 'functional', data: { fn: `F.${fn}`, model: g.className, acts, plain: fn === 'alpha_dropout' ? 'dropout' : 'dropout2d' }, path: d.path, span: call.span, fixes });
      },
    });
  }
  return out;
}
