// File facts: one parse and one lowering pass per file, cached by content hash, plus the indexes views ask for.
import { createHash } from 'node:crypto';
import type { PythonParser, Tree } from './parser';
import { lowerModule, type LoweredStatements } from './lower';
import { dottedName, walkExpr, walkStmts, stmtExprs, type CallExpr, type ClassStmt, type DefStmt, type ModuleIR, type Span } from './ir';

export interface ImportFact {
  /** Local name bound. */
  local: string;
  /** Module imported from (absolute or relative with `level` dots). */
  module: string;
  level: number;
  /** Imported member (for `from m import x`), or null for `import m`. */
  member: string | null;
  span: Span;
}

export interface CallFact {
  /** The callee as written (`nn.Conv2d`, `self.bn`), or null for computed callees. */
  callee: string | null;
  positional: number;
  keywords: string[];
  call: CallExpr;
}

export interface Comment {
  line: number;
  /** Text after `#`. */
  text: string;
  /** True when the comment is the only thing on its line. */
  ownLine: boolean;
  span: Span;
}

export interface FileFacts {
  hash: string;
  ir: ModuleIR;
  imports: ImportFact[];
  classes: ClassStmt[];
  /** Top-level function definitions (methods live in their class body). */
  functions: DefStmt[];
  calls: CallFact[];
  /** Comments that mention regwise (allowances); other comments are not kept. */
  comments: Comment[];
  notes: string[];
}

export function contentHash(text: string): string {
  return createHash('sha1').update(text).digest('hex');
}

/**
 * Extracts facts from text (parsing it), or from a given tree (the editor's incremental tree); `reuse` holds the
 * lowered statements of the file's previous version (see LoweredStatements).
 */
export function extractFacts(parser: PythonParser, text: string, tree?: Tree, reuse?: LoweredStatements): FileFacts {
  const t = tree ?? parser.parse(text);
  const ir = lowerModule(t, text, reuse);
  const imports: ImportFact[] = [];
  const classes: ClassStmt[] = [];
  const functions: DefStmt[] = [];
  const calls: CallFact[] = [];
  for (const s of ir.body) if (s.k === 'def') functions.push(s);
  walkStmts(ir.body, (s) => {
    if (s.k === 'import') {
      for (const n of s.names) {
        if (n.alias) imports.push({ local: n.alias, module: n.module, level: 0, member: null, span: s.span });
        else imports.push({ local: n.module.split('.')[0], module: n.module, level: 0, member: null, span: s.span });
      }
    } else if (s.k === 'from') {
      for (const n of s.names) imports.push({ local: n.alias ?? n.name, module: s.module, level: s.level, member: n.name, span: s.span });
    } else if (s.k === 'class') classes.push(s);
    for (const e of stmtExprs(s)) {
      walkExpr(e, (x) => {
        if (x.k === 'call') calls.push({ callee: dottedName(x.fn), positional: x.args.length, keywords: x.kwargs.map((k) => k.name), call: x });
      });
    }
  });
  const notes: string[] = [];
  if (ir.syntaxErrors.length) notes.push(`${ir.syntaxErrors.length} syntax error(s); the rest of the file was analysed`);
  if (ir.truncated) notes.push(`${ir.truncated} subtree(s) nested too deeply were not analysed`);
  const comments = regwiseComments(t, text);
  if (!tree) t.delete();
  return { hash: contentHash(text), ir, imports, classes, functions, calls, comments, notes };
}

/** Finds `# ... regwise ...` comments without walking the whole tree: search the text, confirm with the tree. */
function regwiseComments(tree: Tree, text: string): Comment[] {
  const out: Comment[] = [];
  for (let i = text.indexOf('regwise'); i !== -1; i = text.indexOf('regwise', i + 7)) {
    const node = tree.rootNode.descendantForIndex(i);
    if (!node || node.type !== 'comment') continue;
    if (out.length && out[out.length - 1].span.start === node.startIndex) continue;
    const lineStart = text.lastIndexOf('\n', node.startIndex - 1) + 1;
    const ownLine = text.slice(lineStart, node.startIndex).trim() === '';
    out.push({
      line: node.startPosition.row,
      text: node.text.replace(/^#\s?/, ''),
      ownLine,
      span: { start: node.startIndex, end: node.endIndex, line: node.startPosition.row, col: node.startPosition.column, endLine: node.endPosition.row, endCol: node.endPosition.column },
    });
  }
  return out;
}

/** A content-hash cache: unchanged files are never parsed again. */
export class FactsCache {
  private readonly byHash = new Map<string, FileFacts>();
  constructor(private readonly parser: PythonParser, private readonly limit = 20000) {}

  get(text: string): FileFacts {
    const h = contentHash(text);
    const hit = this.byHash.get(h);
    if (hit) return hit;
    const f = extractFacts(this.parser, text);
    if (this.byHash.size >= this.limit) this.byHash.delete(this.byHash.keys().next().value!);
    this.byHash.set(h, f);
    return f;
  }

  put(facts: FileFacts): void {
    this.byHash.set(facts.hash, facts);
  }
}
