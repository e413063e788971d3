// selu-init: layers of a SELU network initialised with a Kaiming gain for ReLU (or SELU) instead of LeCun normal.
import { defineRule, type RuleContext } from '../server/src/engine/rule';
import type { CallExpr } from '../server/src/engine/ir';
import type { Fix, TextEdit } from '../server/src/engine/types';
import { num, str } from '../server/src/engine/values';
import { activationProfile } from '../server/src/engine/views/activations';
import { callArg, type InitCall, type Layer, type ModelGraph } from '../server/src/engine/views/model-graph';
import { kwargEdit, layerLabel, lineRef, onePerSite, pyNumber, replaceExpr, siteKey, type SiteFinding } from './util';

const MESSAGES = {
  kaiming:
    '`{fn}` with nonlinearity={nl} initialises {layers} of the SELU network `{model}` ({selu}) with gain {gain}, i.e. std {gain}/sqrt({mode}). Self-normalisation assumes LeCun normal weights (std 1/sqrt(fan_in)), which kaiming_* gives with nonlinearity=\'linear\' (gain 1); the nn.SELU documentation asks for \'linear\' rather than \'selu\'.',
} as const;
type Ctx = RuleContext<typeof MESSAGES>;

interface Cand extends SiteFinding {
  report: () => void;
}

const KAIMING = new Set(['torch.nn.init.kaiming_normal_', 'torch.nn.init.kaiming_uniform_', 'torch.nn.init.kaiming_normal', 'torch.nn.init.kaiming_uniform']);

export default defineRule({
  meta: {
    id: 'selu-init',
    title: 'SELU network initialised for ReLU',
    family: 'model',
    level: 'info',
    frameworks: ['pytorch'],
    summary: 'Layers of a SELU network are initialised with kaiming_normal_/kaiming_uniform_ for ReLU, leaky ReLU or SELU, whose gain differs from the LeCun normal initialisation self-normalisation relies on.',
    fix: 'suggested',
    sources: [
      'Klambauer, Unterthiner, Mayr & Hochreiter, "Self-Normalizing Neural Networks", NeurIPS 2017 (weights with zero mean and variance 1/n)',
      'PyTorch docs: torch.nn.SELU (use nonlinearity=\'linear\' with kaiming_normal_), torch.nn.init.calculate_gain (relu sqrt(2), selu 3/4, linear 1)',
    ],
    messages: MESSAGES,
  },
  check(ctx) {
    for (const c of onePerSite(ctx, (g) => candidates(ctx, g))) c.report();
  },
});

/** torch.nn.init.calculate_gain for the nonlinearities this rule flags; undefined for the rest. */
function gainOf(nl: string, a: number): number | undefined {
  if (nl === 'relu') return Math.SQRT2;
  if (nl === 'selu') return 0.75;
  if (nl === 'leaky_relu') return Math.sqrt(2 / (1 + a * a));
  return undefined;
}

function candidates(ctx: Ctx, g: ModelGraph): Cand[] {
  const prof = activationProfile(g);
  if (!prof.seluNetwork) return [];
  const selu = prof.selu[0].layer ? `SELU \`${prof.selu[0].layer.name}\`` : `${prof.selu[0].label} at ${lineRef(prof.selu[0].call!.path, prof.selu[0].call!.call.span.line)}`;
  // the last initialisation of a weight is the one that stays
  const last = new Map<Layer, InitCall>();
  for (const i of g.inits) if (i.layer && i.param === 'weight') last.set(i.layer, i);
  const byCall = new Map<CallExpr, { init: InitCall; layers: Layer[] }>();
  for (const [layer, init] of last) {
    if (!KAIMING.has(init.q) || (layer.family !== 'linear' && layer.family !== 'conv' && layer.family !== 'convtranspose')) continue;
    const e = byCall.get(init.call) ?? { init, layers: [] };
    e.layers.push(layer);
    byCall.set(init.call, e);
  }
  const out: Cand[] = [];
  for (const { init, layers } of byCall.values()) {
    const nlV = init.kwargs.get('nonlinearity') ?? init.args[3];
    const nl = nlV === undefined ? 'leaky_relu' : str(nlV);
    const a = num(init.kwargs.get('a') ?? init.args[1]) ?? (init.kwargs.has('a') || init.args.length > 1 ? undefined : 0);
    if (nl === undefined || a === undefined) continue;
    const gain = gainOf(nl, a);
    if (gain === undefined || Math.abs(gain - 1) < 1e-9) continue;
    const modeV = init.kwargs.get('mode') ?? init.args[2];
    const mode = modeV === undefined ? 'fan_in' : str(modeV);
    if (mode !== 'fan_in' && mode !== 'fan_out') continue;
    layers.sort((x, y) => g.layers.indexOf(x) - g.layers.indexOf(y));
    const names = layers.slice(0, 4).map(layerLabel).join(', ') + (layers.length > 4 ? ` and ${layers.length - 4} more` : '');
    const call = init.call;
    out.push({
      key: siteKey(init.path, call),
      sitePath: init.path,
      report: () => {
        const text = ctx.textOf(init.path);
        const given = callArg(call, 3, 'nonlinearity');
        const quote = given.given === 'yes' && given.expr.k === 'str' && text[given.expr.span.start] === '"' ? '"' : "'";
        let edit: TextEdit | undefined;
        if (given.given === 'yes') edit = given.keyword ? kwargEdit(text, init.path, call, 'nonlinearity', `${quote}linear${quote}`) : replaceExpr(init.path, given.expr, `${quote}linear${quote}`);
        else if (given.given === 'no') edit = kwargEdit(text, init.path, call, 'nonlinearity', `${quote}linear${quote}`);
        const fixes: Fix[] = edit ? [{ title: "Use nonlinearity='linear' (LeCun normal)", kind: 'suggested', edits: [edit] }] : [];
        ctx.report({
          messageId: 'kaiming',
          data: {
            fn: init.q.replace('torch.nn.init.', 'nn.init.'),
            nl: nlV === undefined ? "'leaky_relu' (the default)" : `'${nl}'`,
            layers: layers.length === 1 ? names : `${layers.length} layers (${names})`,
            model: g.className,
            selu,
            gain: nl === 'relu' || (nl === 'leaky_relu' && a === 0) ? 'sqrt(2)' : pyNumber(+gain.toFixed(4)),
            mode: mode!,
          },
          path: init.path,
          span: call.span,
          fixes,
        });
      },
    });
  }
  return out;
}
