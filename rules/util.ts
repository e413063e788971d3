// Small helpers rules share for messages and edits; facts about code belong in views, not here.
import * as posix from 'node:path/posix';
import type { CallExpr, Expr } from '../server/src/engine/ir';
import type { TextEdit } from '../server/src/engine/types';
import type { Views } from '../server/src/engine/views';
import type { Layer, ModelGraph } from '../server/src/engine/views/model-graph';

/** `torch.nn.BatchNorm2d` → `BatchNorm2d`; a user class `path::Block` → `Block`. */
export function layerShortType(type: string): string {
  const i = type.lastIndexOf('::');
  if (i >= 0) return type.slice(i + 2);
  return type.slice(type.lastIndexOf('.') + 1);
}

/** `models.py:12` (1-based), for messages. */
export function lineRef(path: string, line0: number): string {
  return `${posix.basename(path)}:${line0 + 1}`;
}

/**
 * An edit that sets keyword `name=value` on a call: replaces an existing keyword's value, or appends the keyword
 * after the last argument. Returns undefined when the call cannot be edited safely (e.g. `**kwargs` present).
 */
export function kwargEdit(text: string, path: string, call: CallExpr, name: string, value: string): TextEdit | undefined {
  const existing = call.kwargs.find((k) => k.name === name);
  if (existing) return { path, start: existing.value.span.start, end: existing.value.span.end, newText: value };
  if (call.starKwargs.length) return undefined;
  const last: Expr | undefined = [...call.args, ...call.kwargs.map((k) => k.value)].sort((a, b) => a.span.end - b.span.end).pop();
  const close = call.argsSpan.end - 1;
  if (text[close] !== ')') return undefined;
  if (!last) return { path, start: close, end: close, newText: `${name}=${value}` };
  // keep a trailing comma style: `f(a, b,)` → `f(a, b, name=value,)`
  const between = text.slice(last.span.end, close);
  const trailingComma = between.trimEnd().endsWith(',');
  if (trailingComma) {
    const commaAt = last.span.end + between.indexOf(',');
    return { path, start: commaAt + 1, end: commaAt + 1, newText: ` ${name}=${value},` };
  }
  return { path, start: last.span.end, end: last.span.end, newText: `, ${name}=${value}` };
}

/** Replace the source text of an expression. */
export function replaceExpr(path: string, e: Expr, newText: string): TextEdit {
  return { path, start: e.span.start, end: e.span.end, newText };
}

/** A number as Python would print it in a fix: 0.1, 0.01, 1e-05. */
export function pyNumber(n: number): string {
  const r = +n.toPrecision(12);
  if (Number.isInteger(r)) return String(r);
  return String(r);
}

/**
 * An edit that removes keyword `name` from a call together with the comma that joins it to its neighbour:
 * `f(a, name=v)` → `f(a)`, `f(name=v, b)` → `f(b)`. Undefined when the keyword is absent.
 */
export function removeKwargEdit(text: string, path: string, call: CallExpr, name: string): TextEdit | undefined {
  const kw = call.kwargs.find((k) => k.name === name);
  if (!kw) return undefined;
  const others = [...call.args, ...call.kwargs.filter((k) => k !== kw).map((k) => k), ...call.starKwargs]
    .map((x) => x.span)
    .sort((a, b) => a.start - b.start);
  const before = others.filter((s) => s.end <= kw.span.start).pop();
  const after = others.find((s) => s.start >= kw.span.end);
  if (before) return { path, start: before.end, end: kw.span.end, newText: '' };
  if (after) return { path, start: kw.span.start, end: after.start, newText: '' };
  // the only argument: drop it and a trailing comma
  const close = call.argsSpan.end - 1;
  return text[close] === ')' ? { path, start: call.argsSpan.start + 1, end: close, newText: '' } : undefined;
}

/** A candidate finding a rule computed on one model graph; `key` identifies its site across graphs. */
export interface SiteFinding {
  key: string;
  sitePath: string;
}

/**
 * One finding per site although a site can appear in several model graphs: sites come from the graphs of the checked
 * file, each finding's wording from the first graph in `graphOrder` that yields a finding there (so it is stable).
 */
export function onePerSite<T extends SiteFinding>(ctx: { path: string; views: Views }, evaluate: (g: ModelGraph) => T[]): T[] {
  const memo = new Map<ModelGraph, T[]>();
  const ev = (g: ModelGraph) => {
    let r = memo.get(g);
    if (!r) memo.set(g, (r = evaluate(g)));
    return r;
  };
  const models = ctx.views.models;
  const out: T[] = [];
  const done = new Set<string>();
  for (const g of models.graphsIn(ctx.path)) {
    for (const cand of ev(g)) {
      if (done.has(cand.key)) continue;
      done.add(cand.key);
      let chosen = cand;
      for (const h of models.graphOrder(cand.sitePath, ctx.path)) {
        const hit = ev(h).find((x) => x.key === cand.key);
        if (hit) {
          chosen = hit;
          break;
        }
      }
      out.push(chosen);
    }
  }
  return out;
}

/** A stable key for a call site. */
export function siteKey(path: string, call: CallExpr): string {
  return `${path}\0${call.span.start}\0${call.span.end}`;
}

/** `BatchNorm2d \`blocks.0.1\``, for messages. */
export function layerLabel(l: Layer): string {
  return `${layerShortType(l.type)} \`${l.name}\``;
}

/** `model.py:12`, or `forward` when the layer has no known site. */
export function layerLine(l: Layer): string {
  return l.site ? lineRef(l.site.path, l.site.call.span.line) : 'unknown line';
}

/** Where code runs, for messages: `evaluate()` for a function, `the top level of train.py` for a script or notebook. */
export function scopeLabel(fn: string): string {
  return /\.(py|ipynb)$/i.test(fn) ? `the top level of ${fn}` : `${fn}()`;
}
