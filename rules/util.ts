// Small helpers rules share for messages and edits; facts about code belong in views, not here.
import * as posix from 'node:path/posix';
import type { CallExpr, Expr } from '../server/src/engine/ir';
import type { TextEdit } from '../server/src/engine/types';

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
