// Which activations a model graph uses (layers and functional calls in forward): the fact the SELU rules share.
import type { CallExpr } from '../ir';
import { type Layer, type ModelGraph, tensorCallName } from './model-graph';

/** Where an activation is used: a layer, or a function / tensor method called in forward. */
export interface ActivationUse {
  /** `SELU` for a layer, `F.selu` / `torch.relu` / `Tensor.relu` for a call. */
  label: string;
  kind: 'selu' | 'relu-family' | 'elu-family' | 'output';
  layer?: Layer;
  call?: { path: string; call: CallExpr };
}

export interface ActivationProfile {
  uses: ActivationUse[];
  selu: ActivationUse[];
  /** ReLU and its piecewise-linear or smooth relatives (LeakyReLU, PReLU, GELU, SiLU, ...). */
  reluFamily: ActivationUse[];
  /**
   * A self-normalising network: SELU present, forward traced, and no other hidden activation (ReLU family, ELU/CELU);
   * output activations (sigmoid, softmax, tanh) do not count.
   */
  seluNetwork: boolean;
  /** Forward applies something the engine cannot see into (a non-torch callable) to a tensor: it could be any activation. */
  unknownOps: boolean;
}

const RELU_LAYERS = new Set(['ReLU', 'ReLU6', 'LeakyReLU', 'PReLU', 'RReLU', 'GELU', 'SiLU', 'Mish', 'Hardswish']);
const ELU_LAYERS = new Set(['ELU', 'CELU']);
const RELU_FUNCS = new Set(['relu', 'relu_', 'relu6', 'leaky_relu', 'leaky_relu_', 'prelu', 'rrelu', 'rrelu_', 'gelu', 'silu', 'mish', 'hardswish']);
const ELU_FUNCS = new Set(['elu', 'elu_', 'celu', 'celu_']);
const SELU_FUNCS = new Set(['selu', 'selu_']);
const OUTPUT_FUNCS = new Set(['sigmoid', 'tanh', 'softmax', 'log_softmax']);

function kindOfName(name: string, layer: boolean): ActivationUse['kind'] | undefined {
  if (layer) {
    if (name === 'SELU') return 'selu';
    if (RELU_LAYERS.has(name)) return 'relu-family';
    if (ELU_LAYERS.has(name)) return 'elu-family';
    if (['Sigmoid', 'Tanh', 'Softmax', 'LogSoftmax'].includes(name)) return 'output';
    return undefined;
  }
  if (SELU_FUNCS.has(name)) return 'selu';
  if (RELU_FUNCS.has(name)) return 'relu-family';
  if (ELU_FUNCS.has(name)) return 'elu-family';
  if (OUTPUT_FUNCS.has(name)) return 'output';
  return undefined;
}

/** `torch.nn.functional.selu` → `F.selu`; `torch.relu` stays; `tensor.relu` → `Tensor.relu`. */
function callLabel(q: string): { name: string; label: string } | undefined {
  for (const [prefix, shown] of [['torch.nn.functional.', 'F.'], ['torch.', 'torch.'], ['tensor.', 'Tensor.']] as const) {
    if (q.startsWith(prefix) && !q.slice(prefix.length).includes('.')) return { name: q.slice(prefix.length), label: `${shown}${q.slice(prefix.length)}` };
  }
  return undefined;
}

const cache = new WeakMap<ModelGraph, ActivationProfile>();

export function activationProfile(g: ModelGraph): ActivationProfile {
  const hit = cache.get(g);
  if (hit) return hit;
  const uses: ActivationUse[] = [];
  for (const l of g.layers) {
    if (!l.type.startsWith('torch.nn.')) continue;
    const name = l.type.slice('torch.nn.'.length);
    const kind = kindOfName(name, true);
    if (kind) uses.push({ label: name, kind, layer: l });
  }
  const seenCalls = new Set<CallExpr>();
  let unknownOps = false;
  for (const c of g.calls) {
    const opaqueCallee = c.callee.t === 'obj' || c.callee.t === 'unknown' || (c.callee.t === 'ext' && !c.callee.q.startsWith('builtins.'));
    if (!tensorCallName(c) && opaqueCallee && c.args.some((a) => a.t === 'tensor')) unknownOps = true;
    const q = tensorCallName(c);
    const lab = q && callLabel(q);
    if (!lab || seenCalls.has(c.call)) continue;
    const kind = kindOfName(lab.name, false);
    if (!kind) continue;
    seenCalls.add(c.call);
    uses.push({ label: lab.label, kind, call: { path: c.path, call: c.call } });
  }
  const selu = uses.filter((u) => u.kind === 'selu');
  const reluFamily = uses.filter((u) => u.kind === 'relu-family');
  const profile: ActivationProfile = {
    uses,
    selu,
    reluFamily,
    seluNetwork: g.traced && selu.length > 0 && !uses.some((u) => u.kind === 'relu-family' || u.kind === 'elu-family'),
    unknownOps,
  };
  cache.set(g, profile);
  return profile;
}
