// torch.nn.functional dropout calls made by a model's forward (and the methods forward calls), resolved by the
// interpreter: which function, its rate, whether `training=` is given, and the method's `self` name for fixes.
import type { CallExpr, Expr } from '../ir';
import type { FuncInfo, ModuleInst, Value } from '../values';
import { callArg, type ForwardCall, type ModelGraph, type ModelGraphs } from './model-graph';

/** The functional dropouts and their `training` default (torch/nn/functional.py). */
export const FUNCTIONAL_DROPOUTS: ReadonlyMap<string, { trainingDefault: boolean; alpha: boolean }> = new Map([
  ['torch.nn.functional.dropout', { trainingDefault: true, alpha: false }],
  ['torch.nn.functional.dropout1d', { trainingDefault: true, alpha: false }],
  ['torch.nn.functional.dropout2d', { trainingDefault: true, alpha: false }],
  ['torch.nn.functional.dropout3d', { trainingDefault: true, alpha: false }],
  ['torch.nn.functional.alpha_dropout', { trainingDefault: false, alpha: true }],
  ['torch.nn.functional.feature_alpha_dropout', { trainingDefault: false, alpha: true }],
]);

export interface FunctionalDropout {
  /** Canonical name, `torch.nn.functional.dropout`. */
  q: string;
  alpha: boolean;
  call: CallExpr;
  path: string;
  /** `p` as the interpreter evaluated it (the library default 0.5 when not given), and its expression. */
  p: Value;
  pExpr?: Expr;
  /** Whether `training` is passed (third positional or keyword); `maybe` behind `*args` / `**kwargs`. */
  training: 'yes' | 'no' | 'maybe';
  /** Set when the call sits in a method of an nn.Module (forward, or a method forward calls). */
  method?: { fn: FuncInfo; self: ModuleInst; selfName: string };
}

function isPlainMethod(fn: FuncInfo): boolean {
  return !fn.stmt.decorators.some((d) => d.k === 'name' && (d.id === 'staticmethod' || d.id === 'classmethod'));
}

function describe(fc: ForwardCall, q: string): FunctionalDropout {
  const spec = FUNCTIONAL_DROPOUTS.get(q)!;
  const p = callArg(fc.call, 1, 'p');
  const tr = callArg(fc.call, 2, 'training');
  const pValue: Value = p.given === 'no' ? { t: 'num', v: 0.5 } : fc.kwargs.get('p') ?? (p.given === 'yes' && !p.keyword ? fc.args[1] : undefined) ?? { t: 'unknown' };
  const first = fc.fn?.stmt.params[0];
  const method = fc.fn && fc.self && first && first.kind === 'normal' && isPlainMethod(fc.fn) ? { fn: fc.fn, self: fc.self, selfName: first.name } : undefined;
  return {
    q, alpha: spec.alpha, call: fc.call, path: fc.path, p: pValue, pExpr: p.given === 'yes' ? p.expr : undefined,
    training: tr.given, method,
  };
}

/** Functional dropout calls traced through `g`'s forward, one per call site (first evaluation wins). */
export function functionalDropouts(g: ModelGraph): FunctionalDropout[] {
  const out: FunctionalDropout[] = [];
  const seen = new Set<string>();
  for (const fc of g.calls) {
    if (!fc.q || !FUNCTIONAL_DROPOUTS.has(fc.q)) continue;
    const key = `${fc.path}\0${fc.call.span.start}`;
    if (seen.has(key)) continue;
    seen.add(key);
    out.push(describe(fc, fc.q));
  }
  return out;
}

const byPathCache = new WeakMap<ModelGraphs, Map<string, FunctionalDropout[]>>();

/**
 * Functional dropout calls located in `path`, traced through any model of the workspace (a base class's forward in
 * this file may only be traceable through a subclass elsewhere). Built once per analysis.
 */
export function functionalDropoutsIn(models: ModelGraphs, path: string): FunctionalDropout[] {
  let index = byPathCache.get(models);
  if (!index) {
    index = new Map();
    const seen = new Set<string>();
    for (const g of models.all()) {
      for (const d of functionalDropouts(g)) {
        // the first model that reaches a call in a module method describes it
        const key = `${d.path}\0${d.call.span.start}\0${d.method ? 'm' : '-'}`;
        if (seen.has(key)) continue;
        seen.add(key);
        index.set(d.path, [...(index.get(d.path) ?? []), d]);
      }
    }
    byPathCache.set(models, index);
  }
  return index.get(path) ?? [];
}
