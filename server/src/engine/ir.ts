// The engine's own syntax model of a Python file: plain, serialisable data lowered once from the tree-sitter tree.

/** A source range: offsets in UTF-16 code units, lines and columns 0-based. */
export interface Span {
  start: number;
  end: number;
  line: number;
  col: number;
  endLine: number;
  endCol: number;
}

export interface Keyword {
  name: string;
  value: Expr;
  span: Span;
}

export type Expr =
  | { k: 'name'; id: string; span: Span }
  | { k: 'attr'; obj: Expr; attr: string; span: Span; attrSpan: Span }
  | { k: 'call'; fn: Expr; args: Expr[]; kwargs: Keyword[]; starKwargs: Expr[]; span: Span; argsSpan: Span }
  | { k: 'num'; value: number; raw: string; span: Span }
  | { k: 'str'; value: string; fstring: boolean; parts?: FStringPart[]; span: Span }
  | { k: 'bool'; value: boolean; span: Span }
  | { k: 'none'; span: Span }
  | { k: 'list' | 'tuple' | 'set'; items: Expr[]; span: Span }
  | { k: 'dict'; entries: { key: Expr | null; value: Expr }[]; span: Span }
  | { k: 'bin'; op: string; left: Expr; right: Expr; span: Span }
  | { k: 'unary'; op: string; operand: Expr; span: Span }
  | { k: 'boolop'; op: 'and' | 'or'; left: Expr; right: Expr; span: Span }
  | { k: 'cmp'; ops: string[]; operands: Expr[]; span: Span }
  | { k: 'sub'; obj: Expr; index: Expr; span: Span }
  | { k: 'slice'; lower: Expr | null; upper: Expr | null; step: Expr | null; span: Span }
  | { k: 'star'; value: Expr; span: Span }
  | { k: 'comp'; kind: 'list' | 'gen' | 'set' | 'dict'; elt: Expr; value: Expr | null; fors: { target: Expr; iter: Expr }[]; ifs: Expr[]; span: Span }
  | { k: 'cond'; test: Expr; body: Expr; orelse: Expr; span: Span }
  | { k: 'lambda'; params: Param[]; body: Expr; span: Span }
  | { k: 'walrus'; target: string; value: Expr; span: Span }
  | { k: 'unknown'; span: Span; what: string };

export type ExprKind = Expr['k'];

/**
 * A piece of an f-string: literal text, or a replacement field. `plain` is false when the field has a conversion,
 * a format spec or `=`, whose rendering the interpreter does not reproduce. Fields are not children of the string
 * for walks: only the interpreter reads them, to name layers registered as `add_module(f"layer{i}", ...)`.
 */
export type FStringPart = string | { expr: Expr; plain: boolean };

export interface Param {
  name: string;
  kind: 'normal' | 'star' | 'kwstar' | 'kwonly';
  default: Expr | null;
  span: Span;
}

export type Stmt =
  | { k: 'expr'; value: Expr; span: Span }
  | { k: 'assign'; targets: Expr[]; value: Expr; span: Span }
  | { k: 'augassign'; target: Expr; op: string; value: Expr; span: Span }
  | { k: 'return'; value: Expr | null; span: Span }
  | { k: 'if'; test: Expr; body: Stmt[]; orelse: Stmt[]; span: Span }
  | { k: 'for'; target: Expr; iter: Expr; body: Stmt[]; orelse: Stmt[]; span: Span }
  | { k: 'while'; test: Expr; body: Stmt[]; orelse: Stmt[]; span: Span }
  | { k: 'with'; items: { ctx: Expr; target: Expr | null }[]; body: Stmt[]; span: Span }
  | { k: 'try'; body: Stmt[]; handlers: Stmt[][]; orelse: Stmt[]; finalbody: Stmt[]; span: Span }
  | { k: 'def'; name: string; params: Param[]; decorators: Expr[]; body: Stmt[]; span: Span; nameSpan: Span; bodySpan: Span; async: boolean }
  | { k: 'class'; name: string; bases: Expr[]; keywords: Keyword[]; decorators: Expr[]; body: Stmt[]; span: Span; nameSpan: Span }
  | { k: 'import'; names: { module: string; alias: string | null }[]; span: Span }
  | { k: 'from'; module: string; level: number; names: { name: string; alias: string | null }[]; star: boolean; span: Span }
  | { k: 'pass' | 'break' | 'continue'; span: Span }
  | { k: 'other'; what: string; span: Span };

export type StmtKind = Stmt['k'];
export type DefStmt = Extract<Stmt, { k: 'def' }>;
export type ClassStmt = Extract<Stmt, { k: 'class' }>;
export type CallExpr = Extract<Expr, { k: 'call' }>;

export interface ModuleIR {
  body: Stmt[];
  /** Spans of ERROR / MISSING nodes tree-sitter reported; the rest of the file is still lowered. */
  syntaxErrors: Span[];
  /** Subtrees deeper than the lowering limit became `unknown` nodes; counted here so a note can say so. */
  truncated: number;
}

/** Calls `visit` on every expression under `root` (pre-order), iteratively. Return false to skip children. */
export function walkExpr(root: Expr, visit: (e: Expr) => boolean | void): void {
  const stack: Expr[] = [root];
  while (stack.length) {
    const e = stack.pop()!;
    if (visit(e) === false) continue;
    pushChildrenReversed(e, stack);
  }
}

/**
 * Pushes exprChildren(e) onto `stack` last first, without building the list: walks visit every expression of every
 * file several times per analysis, and the child arrays were most of their allocation. Same order as exprChildren.
 */
function pushChildrenReversed(e: Expr, stack: Expr[]): void {
  switch (e.k) {
    case 'attr': stack.push(e.obj); return;
    case 'call': {
      for (let i = e.starKwargs.length - 1; i >= 0; i--) stack.push(e.starKwargs[i]);
      for (let i = e.kwargs.length - 1; i >= 0; i--) stack.push(e.kwargs[i].value);
      for (let i = e.args.length - 1; i >= 0; i--) stack.push(e.args[i]);
      stack.push(e.fn);
      return;
    }
    case 'list': case 'tuple': case 'set':
      for (let i = e.items.length - 1; i >= 0; i--) stack.push(e.items[i]);
      return;
    case 'dict':
      for (let i = e.entries.length - 1; i >= 0; i--) {
        const en = e.entries[i];
        stack.push(en.value);
        if (en.key) stack.push(en.key);
      }
      return;
    case 'bin': case 'boolop': stack.push(e.right, e.left); return;
    case 'unary': stack.push(e.operand); return;
    case 'cmp':
      for (let i = e.operands.length - 1; i >= 0; i--) stack.push(e.operands[i]);
      return;
    case 'sub': stack.push(e.index, e.obj); return;
    case 'slice':
      if (e.step !== null) stack.push(e.step);
      if (e.upper !== null) stack.push(e.upper);
      if (e.lower !== null) stack.push(e.lower);
      return;
    case 'star': stack.push(e.value); return;
    case 'comp':
      for (let i = e.ifs.length - 1; i >= 0; i--) stack.push(e.ifs[i]);
      for (let i = e.fors.length - 1; i >= 0; i--) stack.push(e.fors[i].iter, e.fors[i].target);
      if (e.value) stack.push(e.value);
      stack.push(e.elt);
      return;
    case 'cond': stack.push(e.orelse, e.test, e.body); return;
    case 'lambda': stack.push(e.body); return;
    case 'walrus': stack.push(e.value); return;
    default: return;
  }
}

export function exprChildren(e: Expr): Expr[] {
  switch (e.k) {
    case 'attr': return [e.obj];
    case 'call': return [e.fn, ...e.args, ...e.kwargs.map((k) => k.value), ...e.starKwargs];
    case 'list': case 'tuple': case 'set': return e.items;
    case 'dict': return e.entries.flatMap((en) => (en.key ? [en.key, en.value] : [en.value]));
    case 'bin': return [e.left, e.right];
    case 'boolop': return [e.left, e.right];
    case 'unary': return [e.operand];
    case 'cmp': return e.operands;
    case 'sub': return [e.obj, e.index];
    case 'slice': return [e.lower, e.upper, e.step].filter((x): x is Expr => x !== null);
    case 'star': return [e.value];
    case 'comp': return [e.elt, ...(e.value ? [e.value] : []), ...e.fors.flatMap((f) => [f.target, f.iter]), ...e.ifs];
    case 'cond': return [e.body, e.test, e.orelse];
    case 'lambda': return [e.body];
    case 'walrus': return [e.value];
    default: return [];
  }
}

/** The expressions a statement holds directly (not those of nested statements). */
export function stmtExprs(s: Stmt): Expr[] {
  switch (s.k) {
    case 'expr': return [s.value];
    case 'assign': return [...s.targets, s.value];
    case 'augassign': return [s.target, s.value];
    case 'return': return s.value ? [s.value] : [];
    case 'if': case 'while': return [s.test];
    case 'for': return [s.target, s.iter];
    case 'with': return s.items.flatMap((i) => (i.target ? [i.ctx, i.target] : [i.ctx]));
    case 'def': return [...s.decorators, ...s.params.flatMap((p) => (p.default ? [p.default] : []))];
    case 'class': return [...s.decorators, ...s.bases, ...s.keywords.map((k) => k.value)];
    default: return [];
  }
}

/** Nested statement lists of a compound statement, in source order. */
export function stmtBlocks(s: Stmt): Stmt[][] {
  switch (s.k) {
    case 'if': case 'for': case 'while': return [s.body, s.orelse];
    case 'with': return [s.body];
    case 'try': return [s.body, ...s.handlers, s.orelse, s.finalbody];
    case 'def': case 'class': return [s.body];
    default: return [];
  }
}

/** Every statement under `body`, pre-order, optionally descending into nested defs/classes. */
export function walkStmts(body: readonly Stmt[], visit: (s: Stmt) => boolean | void): void {
  const stack: Stmt[] = [...body].reverse();
  while (stack.length) {
    const s = stack.pop()!;
    if (visit(s) === false) continue;
    const blocks = stmtBlocks(s);
    for (let b = blocks.length - 1; b >= 0; b--) for (let i = blocks[b].length - 1; i >= 0; i--) stack.push(blocks[b][i]);
  }
}

/** `a.b.c` → "a.b.c"; anything else → null. */
export function dottedName(e: Expr): string | null {
  const parts: string[] = [];
  let cur: Expr = e;
  while (cur.k === 'attr') {
    parts.push(cur.attr);
    cur = cur.obj;
  }
  if (cur.k !== 'name') return null;
  parts.push(cur.id);
  return parts.reverse().join('.');
}

export function kwarg(call: CallExpr, name: string): Keyword | undefined {
  return call.kwargs.find((k) => k.name === name);
}
