// Lowers a tree-sitter Python tree into the engine's ModuleIR in one pass; never throws, degrades to `unknown`/`other`.
import type { Tree, SyntaxNode } from './parser';
import type { Expr, FStringPart, Keyword, ModuleIR, Param, Span, Stmt } from './ir';

/** Beyond this nesting depth subtrees become `unknown`: walks over the IR then never need deep recursion. */
export const MAX_DEPTH = 200;

export function spanOf(n: SyntaxNode): Span {
  const s = n.startPosition;
  const e = n.endPosition;
  return { start: n.startIndex, end: n.endIndex, line: s.row, col: s.column, endLine: e.row, endCol: e.column };
}

/**
 * The top-level statements of a file's previous version, keyed by node type and source text, for the editor: an edit
 * touches one or two of them, the rest are lowered already. A reused statement is a copy with its offsets and lines
 * shifted, so the IR is exactly what lowering the whole file again would give (test/engine/lower-reuse.test.ts).
 */
export class LoweredStatements {
  entries = new Map<string, { stmt: Stmt; start: number; line: number; truncated: number }>();
}

class Lowerer {
  truncated = 0;
  /** Offsets where each line starts: line/column come from offsets in JS, saving two WASM calls per node. */
  private readonly lineStarts: number[];

  constructor(text: string) {
    const starts = [0];
    for (let i = text.indexOf('\n'); i !== -1; i = text.indexOf('\n', i + 1)) starts.push(i + 1);
    this.lineStarts = starts;
  }

  private lineOf(offset: number): number {
    const s = this.lineStarts;
    let lo = 0;
    let hi = s.length - 1;
    while (lo < hi) {
      const mid = (lo + hi + 1) >> 1;
      if (s[mid] <= offset) lo = mid;
      else hi = mid - 1;
    }
    return lo;
  }

  span(n: SyntaxNode): Span {
    const start = n.startIndex;
    const end = n.endIndex;
    const line = this.lineOf(start);
    const endLine = end === start ? line : this.lineOf(end);
    return { start, end, line, col: start - this.lineStarts[line], endLine, endCol: end - this.lineStarts[endLine] };
  }

  /**
   * The module's statements, reusing those of `reuse` whose text is unchanged. Only error-free statements that start a
   * line qualify: their subtree then depends on their own text alone, and every column inside stays the same.
   */
  topLevel(root: SyntaxNode, text: string, reuse: LoweredStatements): Stmt[] {
    const next = new Map<string, { stmt: Stmt; start: number; line: number; truncated: number }>();
    const out: Stmt[] = [];
    for (const c of root.namedChildren) {
      if (!c) continue;
      const type = c.type;
      if (type === 'comment') continue;
      if (type === 'ERROR' || c.startPosition.column !== 0 || c.hasError) {
        this.item(c, type, 0, out);
        continue;
      }
      const start = c.startIndex;
      const line = c.startPosition.row;
      const key = `${type}\0${text.slice(start, c.endIndex)}`;
      const old = reuse.entries.get(key);
      let s: Stmt | null;
      if (old) {
        s = old.start === start && old.line === line ? old.stmt : (shiftIR(old.stmt, start - old.start, line - old.line) as Stmt);
        this.truncated += old.truncated;
        next.set(key, { stmt: s, start, line, truncated: old.truncated });
      } else {
        const before = this.truncated;
        s = this.stmt(c, 1, type);
        if (s) next.set(key, { stmt: s, start, line, truncated: this.truncated - before });
      }
      if (s) out.push(s);
    }
    reuse.entries = next;
    return out;
  }

  block(n: SyntaxNode | null, depth: number): Stmt[] {
    if (!n) return [];
    const out: Stmt[] = [];
    for (const c of n.namedChildren) if (c) this.item(c, c.type, depth, out);
    return out;
  }

  /** One child of a block (`type` is c.type, read once). */
  private item(c: SyntaxNode, type: string, depth: number, out: Stmt[]): void {
    if (type === 'comment') return;
    if (type === 'ERROR') {
      // statements inside an ERROR node are often intact; keep what can be read
      out.push(...this.block(c, depth + 1));
      return;
    }
    const s = this.stmt(c, depth + 1, type);
    if (s) out.push(s);
  }

  /** `type` is n.type when the caller read it already (each read is a call into WASM). */
  stmt(n: SyntaxNode, depth: number, type: string = n.type): Stmt | null {
    const span = this.span(n);
    if (depth > MAX_DEPTH) {
      this.truncated++;
      return { k: 'other', what: 'too-deep', span };
    }
    switch (type) {
      case 'expression_statement': {
        // one namedChildren read gives the first child and the count (each accessor is a call into WASM)
        const kids = n.namedChildren;
        const c = kids[0] ?? null;
        if (!c) return { k: 'other', what: 'empty', span };
        const ct = c.type;
        if (ct === 'assignment') return this.assignment(c, span, depth);
        if (ct === 'augmented_assignment') {
          return {
            k: 'augassign',
            target: this.expr(c.childForFieldName('left'), depth),
            op: c.childForFieldName('operator')?.text ?? '?=',
            value: this.expr(c.childForFieldName('right'), depth),
            span,
          };
        }
        if (kids.length > 1) {
          return { k: 'expr', value: { k: 'tuple', items: kids.map((x) => this.expr(x, depth)), span }, span };
        }
        return { k: 'expr', value: this.expr(c, depth, ct), span };
      }
      case 'return_statement': {
        const c = n.namedChild(0);
        return { k: 'return', value: c ? this.expr(c, depth) : null, span };
      }
      case 'if_statement': {
        const test = this.expr(n.childForFieldName('condition'), depth);
        const body = this.block(n.childForFieldName('consequence'), depth);
        // elif chains become nested ifs in orelse
        const alts = n.childrenForFieldName('alternative');
        let orelse: Stmt[] = [];
        for (let i = alts.length - 1; i >= 0; i--) {
          const a = alts[i];
          if (a.type === 'else_clause') orelse = this.block(a.childForFieldName('body'), depth);
          else if (a.type === 'elif_clause') {
            orelse = [{
              k: 'if',
              test: this.expr(a.childForFieldName('condition'), depth),
              body: this.block(a.childForFieldName('consequence'), depth),
              orelse,
              span: this.span(a),
            }];
          }
        }
        return { k: 'if', test, body, orelse, span };
      }
      case 'for_statement': {
        const alt = n.childForFieldName('alternative');
        return {
          k: 'for',
          target: this.expr(n.childForFieldName('left'), depth),
          iter: this.expr(n.childForFieldName('right'), depth),
          body: this.block(n.childForFieldName('body'), depth),
          orelse: alt ? this.block(alt.childForFieldName('body'), depth) : [],
          span,
        };
      }
      case 'while_statement': {
        const alt = n.childForFieldName('alternative');
        return {
          k: 'while',
          test: this.expr(n.childForFieldName('condition'), depth),
          body: this.block(n.childForFieldName('body'), depth),
          orelse: alt ? this.block(alt.childForFieldName('body'), depth) : [],
          span,
        };
      }
      case 'with_statement': {
        const items: { ctx: Expr; target: Expr | null }[] = [];
        const clause = n.namedChildren.find((c) => c?.type === 'with_clause');
        for (const item of clause?.namedChildren ?? []) {
          if (!item || item.type !== 'with_item') continue;
          const v = item.childForFieldName('value');
          if (v?.type === 'as_pattern') {
            const target = v.childForFieldName('alias') ?? v.namedChildren.find((c) => c?.type === 'as_pattern_target') ?? null;
            const inner = target?.type === 'as_pattern_target' ? target.namedChild(0) : target;
            items.push({ ctx: this.expr(v.namedChild(0), depth), target: inner ? this.expr(inner, depth) : null });
          } else {
            items.push({ ctx: this.expr(v, depth), target: null });
          }
        }
        return { k: 'with', items, body: this.block(n.childForFieldName('body'), depth), span };
      }
      case 'try_statement': {
        const handlers: Stmt[][] = [];
        let orelse: Stmt[] = [];
        let finalbody: Stmt[] = [];
        for (const c of n.namedChildren) {
          if (!c) continue;
          if (c.type === 'except_clause' || c.type === 'except_group_clause') {
            const b = c.namedChildren.find((x) => x?.type === 'block') ?? null;
            handlers.push(this.block(b, depth));
          } else if (c.type === 'else_clause') orelse = this.block(c.childForFieldName('body'), depth);
          else if (c.type === 'finally_clause') finalbody = this.block(c.namedChildren.find((x) => x?.type === 'block') ?? null, depth);
        }
        return { k: 'try', body: this.block(n.childForFieldName('body'), depth), handlers, orelse, finalbody, span };
      }
      case 'decorated_definition': {
        const decorators = n.namedChildren.filter((c) => c?.type === 'decorator').map((d) => this.expr(d!.namedChild(0), depth));
        const def = n.childForFieldName('definition');
        const inner = def ? this.stmt(def, depth) : null;
        if (inner && (inner.k === 'def' || inner.k === 'class')) {
          inner.decorators = decorators;
          return inner;
        }
        return inner ?? { k: 'other', what: 'decorated', span };
      }
      case 'function_definition': {
        const nameNode = n.childForFieldName('name');
        const bodyNode = n.childForFieldName('body');
        return {
          k: 'def',
          name: nameNode?.text ?? '?',
          params: this.params(n.childForFieldName('parameters'), depth),
          decorators: [],
          body: this.block(bodyNode, depth),
          span,
          nameSpan: nameNode ? this.span(nameNode) : span,
          bodySpan: bodyNode ? this.span(bodyNode) : span,
          async: n.children[0]?.type === 'async',
        };
      }
      case 'class_definition': {
        const nameNode = n.childForFieldName('name');
        const bases: Expr[] = [];
        const keywords: Keyword[] = [];
        for (const a of n.childForFieldName('superclasses')?.namedChildren ?? []) {
          if (!a) continue;
          const at = a.type;
          if (at === 'comment') continue;
          if (at === 'keyword_argument') keywords.push(this.keyword(a, depth));
          else bases.push(this.expr(a, depth, at));
        }
        return {
          k: 'class',
          name: nameNode?.text ?? '?',
          bases,
          keywords,
          decorators: [],
          body: this.block(n.childForFieldName('body'), depth),
          span,
          nameSpan: nameNode ? this.span(nameNode) : span,
        };
      }
      case 'import_statement': {
        const names: { module: string; alias: string | null }[] = [];
        for (const c of n.namedChildren) {
          if (!c) continue;
          if (c.type === 'dotted_name') names.push({ module: c.text, alias: null });
          else if (c.type === 'aliased_import') {
            names.push({ module: c.childForFieldName('name')?.text ?? '?', alias: c.childForFieldName('alias')?.text ?? null });
          }
        }
        return { k: 'import', names, span };
      }
      case 'future_import_statement':
        return { k: 'other', what: 'future', span };
      case 'import_from_statement': {
        const modNode = n.childForFieldName('module_name');
        let module = '';
        let level = 0;
        if (modNode?.type === 'relative_import') {
          for (const c of modNode.children) {
            if (!c) continue;
            if (c.type === 'import_prefix') level = c.text.length;
            else if (c.type === 'dotted_name') module = c.text;
          }
        } else if (modNode) module = modNode.text;
        const names: { name: string; alias: string | null }[] = [];
        let star = false;
        for (const c of n.childrenForFieldName('name')) {
          if (c.type === 'dotted_name') names.push({ name: c.text, alias: null });
          else if (c.type === 'aliased_import') {
            names.push({ name: c.childForFieldName('name')?.text ?? '?', alias: c.childForFieldName('alias')?.text ?? null });
          }
        }
        if (n.namedChildren.some((c) => c?.type === 'wildcard_import')) star = true;
        return { k: 'from', module, level, names, star, span };
      }
      case 'pass_statement': return { k: 'pass', span };
      case 'break_statement': return { k: 'break', span };
      case 'continue_statement': return { k: 'continue', span };
      default:
        return { k: 'other', what: type, span };
    }
  }

  assignment(c: SyntaxNode, span: Span, depth: number): Stmt {
    // a = b = value nests as assignment(left=a, right=assignment(left=b, right=value))
    const targets: Expr[] = [];
    let cur: SyntaxNode | null = c;
    let curType = c.type;
    while (cur && curType === 'assignment') {
      const left = cur.childForFieldName('left');
      if (left) targets.push(this.expr(left, depth));
      const right: SyntaxNode | null = cur.childForFieldName('right');
      if (!right) {
        // annotation only (`x: int`): no value
        return { k: 'other', what: 'annotation', span };
      }
      const rt = right.type;
      if (rt !== 'assignment') {
        return { k: 'assign', targets, value: this.expr(right, depth, rt), span };
      }
      cur = right;
      curType = rt;
    }
    return { k: 'other', what: 'assignment', span };
  }

  params(n: SyntaxNode | null, depth: number): Param[] {
    const out: Param[] = [];
    let kwonly = false;
    for (const p of n?.namedChildren ?? []) {
      if (!p) continue;
      const span = this.span(p);
      switch (p.type) {
        case 'identifier': out.push({ name: p.text, kind: kwonly ? 'kwonly' : 'normal', default: null, span }); break;
        case 'typed_parameter': {
          const id = p.namedChildren.find((x) => x?.type === 'identifier');
          const splat = p.namedChildren.find((x) => x?.type === 'list_splat_pattern' || x?.type === 'dictionary_splat_pattern');
          if (splat) {
            const kind = splat.type === 'list_splat_pattern' ? 'star' : 'kwstar';
            if (kind === 'star') kwonly = true;
            out.push({ name: splat.namedChild(0)?.text ?? '?', kind, default: null, span });
          } else out.push({ name: id?.text ?? '?', kind: kwonly ? 'kwonly' : 'normal', default: null, span });
          break;
        }
        case 'default_parameter':
        case 'typed_default_parameter':
          out.push({
            name: p.childForFieldName('name')?.text ?? '?',
            kind: kwonly ? 'kwonly' : 'normal',
            default: this.expr(p.childForFieldName('value'), depth),
            span,
          });
          break;
        case 'list_splat_pattern': kwonly = true; out.push({ name: p.namedChild(0)?.text ?? '?', kind: 'star', default: null, span }); break;
        case 'dictionary_splat_pattern': out.push({ name: p.namedChild(0)?.text ?? '?', kind: 'kwstar', default: null, span }); break;
        case 'keyword_separator': kwonly = true; break;
        default: break;
      }
    }
    return out;
  }

  keyword(a: SyntaxNode, depth: number): Keyword {
    return { name: a.childForFieldName('name')?.text ?? '?', value: this.expr(a.childForFieldName('value'), depth), span: this.span(a) };
  }

  /** `type` is n.type when the caller read it already. */
  expr(n: SyntaxNode | null, depth: number, type?: string): Expr {
    if (!n) return { k: 'unknown', what: 'missing', span: { start: 0, end: 0, line: 0, col: 0, endLine: 0, endCol: 0 } };
    const span = this.span(n);
    if (depth > MAX_DEPTH) {
      this.truncated++;
      return { k: 'unknown', what: 'too-deep', span };
    }
    const d = depth + 1;
    const t = type ?? n.type;
    switch (t) {
      case 'identifier': return { k: 'name', id: n.text, span };
      case 'attribute': {
        const attr = n.childForFieldName('attribute');
        return { k: 'attr', obj: this.expr(n.childForFieldName('object'), d), attr: attr?.text ?? '?', span, attrSpan: attr ? this.span(attr) : span };
      }
      case 'call': {
        const argNode = n.childForFieldName('arguments');
        const args: Expr[] = [];
        const kwargs: Keyword[] = [];
        const starKwargs: Expr[] = [];
        const argType = argNode?.type;
        if (argType === 'generator_expression') args.push(this.expr(argNode, d, argType));
        else {
          for (const a of argNode?.namedChildren ?? []) {
            if (!a) continue;
            const at = a.type;
            if (at === 'comment') continue;
            if (at === 'keyword_argument') kwargs.push(this.keyword(a, d));
            else if (at === 'dictionary_splat') starKwargs.push(this.expr(a.namedChild(0), d));
            else args.push(this.expr(a, d, at));
          }
        }
        return { k: 'call', fn: this.expr(n.childForFieldName('function'), d), args, kwargs, starKwargs, span, argsSpan: argNode ? this.span(argNode) : span };
      }
      case 'integer': {
        const raw = n.text;
        const clean = raw.replace(/_/g, '').replace(/[lL]$/, '');
        const value = /^0[oO]/.test(clean) ? parseInt(clean.slice(2), 8) : /^0[bB]/.test(clean) ? parseInt(clean.slice(2), 2) : Number(clean);
        return { k: 'num', value, raw, span };
      }
      case 'float': {
        const raw = n.text;
        return { k: 'num', value: Number(raw.replace(/_/g, '')), raw, span };
      }
      case 'true': return { k: 'bool', value: true, span };
      case 'false': return { k: 'bool', value: false, span };
      case 'none': return { k: 'none', span };
      case 'string': return this.string(n, span, d);
      case 'concatenated_string': {
        const parts = n.namedChildren.filter((c) => c?.type === 'string').map((c) => this.string(c!, this.span(c!), d));
        return { k: 'str', value: parts.map((p) => (p.k === 'str' ? p.value : '')).join(''), fstring: parts.some((p) => p.k === 'str' && p.fstring), span };
      }
      case 'parenthesized_expression': {
        for (const c of n.namedChildren) {
          if (!c) continue;
          const ct = c.type;
          if (ct !== 'comment') return this.expr(c, d, ct);
        }
        return this.expr(null, d);
      }
      case 'list': case 'tuple': case 'set': case 'expression_list': case 'pattern_list': case 'tuple_pattern': case 'list_pattern': {
        const k = t === 'list' || t === 'list_pattern' ? 'list' : t === 'set' ? 'set' : 'tuple';
        const items: Expr[] = [];
        for (const c of n.namedChildren) {
          if (!c) continue;
          const ct = c.type;
          if (ct !== 'comment') items.push(this.expr(c, d, ct));
        }
        return { k, items, span };
      }
      case 'dictionary': {
        const entries: { key: Expr | null; value: Expr }[] = [];
        for (const c of n.namedChildren) {
          if (!c) continue;
          if (c.type === 'pair') entries.push({ key: this.expr(c.childForFieldName('key'), d), value: this.expr(c.childForFieldName('value'), d) });
          else if (c.type === 'dictionary_splat') entries.push({ key: null, value: this.expr(c.namedChild(0), d) });
        }
        return { k: 'dict', entries, span };
      }
      case 'binary_operator':
        return { k: 'bin', op: n.childForFieldName('operator')?.text ?? '?', left: this.expr(n.childForFieldName('left'), d), right: this.expr(n.childForFieldName('right'), d), span };
      case 'unary_operator':
        return { k: 'unary', op: n.childForFieldName('operator')?.text ?? '?', operand: this.expr(n.childForFieldName('argument'), d), span };
      case 'not_operator':
        return { k: 'unary', op: 'not', operand: this.expr(n.childForFieldName('argument'), d), span };
      case 'boolean_operator': {
        const op = n.childForFieldName('operator')?.text === 'or' ? 'or' : 'and';
        return { k: 'boolop', op, left: this.expr(n.childForFieldName('left'), d), right: this.expr(n.childForFieldName('right'), d), span };
      }
      case 'comparison_operator': {
        const operands: Expr[] = [];
        const ops: string[] = [];
        let pendingOp = '';
        for (const c of n.children) {
          if (!c) continue;
          const ct = c.type;
          const named = c.isNamed;
          if (named && ct !== 'comment') {
            if (pendingOp) ops.push(pendingOp.trim());
            pendingOp = '';
            operands.push(this.expr(c, d, ct));
          } else if (!named) pendingOp += ` ${ct}`;
        }
        return { k: 'cmp', ops, operands, span };
      }
      case 'subscript': {
        const subs = n.childrenForFieldName('subscript');
        const index = subs.length === 1 ? this.expr(subs[0], d) : { k: 'tuple' as const, items: subs.map((s) => this.expr(s, d)), span };
        return { k: 'sub', obj: this.expr(n.childForFieldName('value'), d), index, span };
      }
      case 'slice': {
        // children: [lower] ':' [upper] [':' [step]]
        const parts: (Expr | null)[] = [null, null, null];
        let slot = 0;
        for (const c of n.children) {
          if (!c) continue;
          const ct = c.type;
          if (ct === ':') slot++;
          else if (c.isNamed) parts[slot] = this.expr(c, d, ct);
        }
        return { k: 'slice', lower: parts[0], upper: parts[1], step: parts[2], span };
      }
      case 'list_splat': case 'list_splat_pattern':
        return { k: 'star', value: this.expr(n.namedChild(0), d), span };
      case 'dictionary_splat':
        return { k: 'star', value: this.expr(n.namedChild(0), d), span };
      case 'list_comprehension': case 'generator_expression': case 'set_comprehension': case 'dictionary_comprehension': {
        const kind = t === 'list_comprehension' ? 'list' : t === 'set_comprehension' ? 'set' : t === 'dictionary_comprehension' ? 'dict' : 'gen';
        const bodyNode = n.childForFieldName('body');
        let elt: Expr;
        let value: Expr | null = null;
        if (bodyNode?.type === 'pair') {
          elt = this.expr(bodyNode.childForFieldName('key'), d);
          value = this.expr(bodyNode.childForFieldName('value'), d);
        } else elt = this.expr(bodyNode, d);
        const fors: { target: Expr; iter: Expr }[] = [];
        const ifs: Expr[] = [];
        for (const c of n.namedChildren) {
          if (!c) continue;
          const ct = c.type;
          if (ct === 'for_in_clause') fors.push({ target: this.expr(c.childForFieldName('left'), d), iter: this.expr(c.childForFieldName('right'), d) });
          else if (ct === 'if_clause') ifs.push(this.expr(c.namedChild(0), d));
        }
        return { k: 'comp', kind, elt, value, fors, ifs, span };
      }
      case 'conditional_expression': {
        const kids = n.namedChildren.filter((c) => c && c.type !== 'comment');
        return { k: 'cond', body: this.expr(kids[0] ?? null, d), test: this.expr(kids[1] ?? null, d), orelse: this.expr(kids[2] ?? null, d), span };
      }
      case 'lambda': {
        const ps = n.childForFieldName('parameters');
        return { k: 'lambda', params: ps ? this.params(ps, d) : [], body: this.expr(n.childForFieldName('body'), d), span };
      }
      case 'named_expression':
        return { k: 'walrus', target: n.childForFieldName('name')?.text ?? '?', value: this.expr(n.childForFieldName('value'), d), span };
      case 'await':
        return this.expr(n.namedChild(0), d);
      case 'keyword_argument':
        return this.expr(n.childForFieldName('value'), d);
      case 'ERROR':
        return { k: 'unknown', what: 'error', span };
      default:
        return { k: 'unknown', what: t, span };
    }
  }

  string(n: SyntaxNode, span: Span, d = 0): Expr {
    let fstring = false;
    let value = '';
    const parts: FStringPart[] = [];
    const text = (t: string) => {
      value += t;
      if (typeof parts[parts.length - 1] === 'string') parts[parts.length - 1] += t;
      else parts.push(t);
    };
    for (const c of n.children) {
      if (!c) continue;
      const ct = c.type;
      if (ct === 'string_start') fstring = /f/i.test(c.text);
      else if (ct === 'string_content') text(unescape(c.text));
      else if (ct === 'escape_sequence') text(unescape(c.text));
      else if (ct === 'interpolation') {
        fstring = true;
        const inner = c.childForFieldName('expression');
        const plain = !!inner && c.children.every((x) => !x || x.type === '{' || x.type === '}' || (x.startIndex === inner.startIndex && x.endIndex === inner.endIndex));
        parts.push({ expr: this.expr(inner, d + 1), plain });
      }
    }
    return fstring ? { k: 'str', value, fstring, parts, span } : { k: 'str', value, fstring, span };
  }
}

function unescape(s: string): string {
  if (!s.includes('\\')) return s;
  return s.replace(/\\(n|t|r|\\|'|"|\n)/g, (_, ch: string) => ({ n: '\n', t: '\t', r: '\r', '\\': '\\', "'": "'", '"': '"', '\n': '' } as Record<string, string>)[ch] ?? ch);
}

/** A copy of lowered IR moved by `delta` offsets and `lines` lines (IR is trees of plain objects; only spans move). */
function shiftIR(node: unknown, delta: number, lines: number): unknown {
  if (Array.isArray(node)) {
    const arr = new Array(node.length);
    for (let i = 0; i < node.length; i++) {
      const x = node[i];
      arr[i] = typeof x === 'object' && x !== null ? shiftIR(x, delta, lines) : x;
    }
    return arr;
  }
  const o = node as Record<string, unknown>;
  if (typeof o.endCol === 'number') {
    const sp = o as unknown as Span;
    return { start: sp.start + delta, end: sp.end + delta, line: sp.line + lines, col: sp.col, endLine: sp.endLine + lines, endCol: sp.endCol };
  }
  const copy: Record<string, unknown> = {};
  // `expr(null)` gives a fixed zero span that does not depend on where the statement is
  const fixed = o.k === 'unknown' && o.what === 'missing';
  for (const k in o) {
    const v = o[k];
    copy[k] = typeof v !== 'object' || v === null ? v : fixed && k === 'span' ? { ...(v as Span) } : shiftIR(v, delta, lines);
  }
  return copy;
}

/**
 * One pass over the tree; parse errors become `syntaxErrors`, the valid parts are still lowered. With `reuse` (the
 * editor's previous version of the file) unchanged top-level statements are copied instead of lowered again.
 */
export function lowerModule(tree: Tree, text: string = tree.rootNode.text, reuse?: LoweredStatements): ModuleIR {
  const l = new Lowerer(text);
  const body = reuse ? l.topLevel(tree.rootNode, text, reuse) : l.block(tree.rootNode, 0);
  return { body, syntaxErrors: collectErrors(tree), truncated: l.truncated };
}

/** ERROR and MISSING nodes, found by descending only into subtrees that contain one (iterative). */
function collectErrors(tree: Tree): Span[] {
  const root = tree.rootNode;
  if (!root.hasError) return [];
  const out: Span[] = [];
  const stack: SyntaxNode[] = [root];
  while (stack.length && out.length < 1000) {
    const n = stack.pop()!;
    if (n.isError || n.isMissing) {
      out.push(spanOf(n));
      continue;
    }
    for (const c of n.children) if (c && (c.hasError || c.isMissing)) stack.push(c);
  }
  return out.sort((a, b) => a.start - b.start);
}
