// selu-plain-dropout: ordinary dropout (layer or F.dropout) inside a self-normalising SELU network.
import { defineRule, type RuleContext } from '../server/src/engine/rule';
import type { Fix, TextEdit } from '../server/src/engine/types';
import { pyRepr } from '../server/src/engine/values';
import { activationProfile, type ActivationProfile } from '../server/src/engine/views/activations';
import { functionalDropouts } from '../server/src/engine/views/functional-dropout';
import type { ModelGraph } from '../server/src/engine/views/model-graph';
import { kwargEdit, layerLabel, lineRef, onePerSite, siteKey, type SiteFinding } from './util';

/** Plain dropout and its self-normalising counterpart (torch/nn/modules/dropout.py, torch/nn/functional.py). */
const LAYER_SWAP: Record<string, string> = {
  'torch.nn.Dropout': 'AlphaDropout',
  'torch.nn.Dropout1d': 'FeatureAlphaDropout',
  'torch.nn.Dropout2d': 'FeatureAlphaDropout',
  'torch.nn.Dropout3d': 'FeatureAlphaDropout',
};
const FUNC_SWAP: Record<string, string> = {
  'torch.nn.functional.dropout': 'alpha_dropout',
  'torch.nn.functional.dropout1d': 'feature_alpha_dropout',
  'torch.nn.functional.dropout2d': 'feature_alpha_dropout',
  'torch.nn.functional.dropout3d': 'feature_alpha_dropout',
};

const MESSAGES = {
  layer:
    '{type} `{layer}` (p={rate}) is plain dropout in the SELU network `{model}` ({selu}): it sets dropped units to 0 and scales the rest by 1/(1-p), which moves the mean and variance that SELU keeps at 0 and 1. {alpha}(p={rate}) drops to SELU\'s negative saturation value and re-centres, so the activations stay self-normalised.',
  functional:
    '`{fn}` in forward of the SELU network `{model}` ({selu}) sets dropped units to 0, which moves the mean and variance that SELU keeps at 0 and 1. `F.{alpha}` drops to SELU\'s negative saturation value and re-centres instead.',
} as const;
type Ctx = RuleContext<typeof MESSAGES>;

interface Cand extends SiteFinding {
  report: () => void;
}

export default defineRule({
  meta: {
    id: 'selu-plain-dropout',
    title: 'Plain dropout in a SELU network',
    family: 'model',
    level: 'warning',
    frameworks: ['pytorch'],
    summary: 'A self-normalising (SELU) network uses ordinary dropout, which sets dropped units to 0 and breaks the zero-mean, unit-variance activations SELU maintains; AlphaDropout keeps them.',
    fix: 'safe',
    sources: [
      'Klambauer, Unterthiner, Mayr & Hochreiter, "Self-Normalizing Neural Networks", NeurIPS 2017 (alpha dropout, section on new dropout technique)',
      'PyTorch docs: torch.nn.AlphaDropout, torch.nn.FeatureAlphaDropout, torch.nn.functional.alpha_dropout',
    ],
    messages: MESSAGES,
  },
  check(ctx) {
    for (const c of onePerSite(ctx, (g) => candidates(ctx, g))) c.report();
  },
});

function seluEvidence(p: ActivationProfile): string {
  const u = p.selu[0];
  if (u.layer) return `SELU \`${u.layer.name}\` at ${u.layer.site ? lineRef(u.layer.site.path, u.layer.site.call.span.line) : 'forward'}`;
  return `${u.label} at ${lineRef(u.call!.path, u.call!.call.span.line)}`;
}

function candidates(ctx: Ctx, g: ModelGraph): Cand[] {
  const prof = activationProfile(g);
  if (!prof.seluNetwork) return [];
  const out: Cand[] = [];
  const selu = seluEvidence(prof);
  for (const l of g.layers) {
    const alpha = LAYER_SWAP[l.type];
    const site = l.site;
    if (!alpha || !site) continue;
    const rate = pyRepr(l.inst.args.get('p'));
    out.push({
      key: siteKey(site.path, site.call),
      sitePath: site.path,
      report: () => {
        const fixes: Fix[] = [];
        if (site.call.fn.k === 'attr' && ctx.views.models.calleeOwner(site.path, site.call) === 'torch.nn') {
          fixes.push({ title: `Use nn.${alpha} with the same rate`, kind: 'safe', edits: [{ path: site.path, start: site.call.fn.attrSpan.start, end: site.call.fn.attrSpan.end, newText: alpha }] });
        }
        ctx.report({
          messageId: 'layer',
          data: { type: l.type.slice('torch.nn.'.length), layer: l.name, rate, model: g.className, selu, alpha },
          path: site.path,
          span: site.call.span,
          fixes,
        });
      },
    });
  }
  for (const d of functionalDropouts(g)) {
    const alpha = FUNC_SWAP[d.q];
    if (!alpha) continue;
    const call = d.call;
    const fnName = `F.${d.q.slice('torch.nn.functional.'.length)}`;
    out.push({
      key: siteKey(d.path, call),
      sitePath: d.path,
      report: () => {
        const fixes: Fix[] = [];
        if (call.fn.k === 'attr' && ctx.views.models.calleeOwner(d.path, call) === 'torch.nn.functional') {
          const edits: TextEdit[] = [{ path: d.path, start: call.fn.attrSpan.start, end: call.fn.attrSpan.end, newText: alpha }];
          // F.dropout defaults to training=True, F.alpha_dropout to training=False: keep it dropping in training only
          const selfName = d.method?.selfName;
          let ok = d.training === 'yes';
          if (d.training === 'no' && selfName) {
            const e = kwargEdit(ctx.textOf(d.path), d.path, call, 'training', `${selfName}.training`);
            if (e) {
              edits.push(e);
              ok = true;
            }
          }
          if (ok) fixes.push({ title: `Use F.${alpha}${d.training === 'yes' ? '' : ` with training=${selfName}.training`}`, kind: 'safe', edits });
        }
        ctx.report({
          messageId: 'functional',
          data: { fn: fnName, model: g.className, selu, alpha },
          path: d.path,
          span: call.span,
          fixes,
        });
      },
    });
  }
  return out;
}
