// The analysis service both adapters sit on: holds the workspace, runs the rules, applies allowances and levels.
import type { PythonParser, Tree } from './parser';
import { FactsCache, extractFacts, type Comment, type FileFacts } from './facts';
import { Workspace } from './workspace';
import { Views } from './views';
import { formatMessage, type Rule, type RuleContext } from './rule';
import { notebookSource, isNotebookPath, type SourceFile } from './source';
import { DEFAULT_THRESHOLDS, type EngineOptions, type Finding, type Level, type Thresholds } from './types';
import type { Span } from './ir';
import { LoweredStatements } from './lower';

export const INTERNAL_RULE = 'internal-error';

export interface Allowance {
  rules: string[];
  fileWide: boolean;
  /** 0-based line the allowance covers (its own line, or the next when alone on a line). */
  line: number;
  reason?: string;
}

const ALLOW_RE = /^regwise:\s*(allow|allow-file)\s+([a-z0-9-]+(?:\s*,\s*[a-z0-9-]+)*)\s*(?:--\s*(.*))?$/;

export function parseAllowances(comments: readonly Comment[]): Allowance[] {
  const out: Allowance[] = [];
  for (const c of comments) {
    const m = ALLOW_RE.exec(c.text.trim());
    if (!m) continue;
    out.push({
      rules: m[2].split(',').map((s) => s.trim()),
      fileWide: m[1] === 'allow-file',
      line: c.ownLine ? c.line + 1 : c.line,
      reason: m[3]?.trim() || undefined,
    });
  }
  return out;
}

export function isAllowed(allowances: readonly Allowance[], rule: string, line: number): boolean {
  return allowances.some((a) => a.rules.includes(rule) && (a.fileWide || a.line === line));
}

export class Engine {
  readonly ws = new Workspace();
  private readonly cache: FactsCache;
  private options: EngineOptions = {};
  /** Per path, the lowered statements of the editor's last version: an edit re-lowers only what it changed. */
  private readonly lowered = new Map<string, LoweredStatements>();

  constructor(readonly parser: PythonParser, readonly rules: readonly Rule[]) {
    this.cache = new FactsCache(parser);
  }

  configure(options: EngineOptions): void {
    this.options = options;
  }

  get thresholds(): Thresholds {
    return { ...DEFAULT_THRESHOLDS, ...this.options.thresholds };
  }

  /** Adds or replaces a file. `.ipynb` text is a notebook's JSON; an editor may pass its own tree for `.py`. */
  setFile(path: string, raw: string, tree?: Tree): SourceFile {
    let source: SourceFile = { path, text: raw, raw };
    if (isNotebookPath(path)) source = notebookSource(path, raw) ?? { path, text: '', raw };
    let facts: FileFacts;
    if (tree) {
      let reuse = this.lowered.get(path);
      if (!reuse) this.lowered.set(path, (reuse = new LoweredStatements()));
      facts = extractFacts(this.parser, source.text, tree, reuse);
    } else facts = this.cache.get(source.text);
    this.ws.addFile(source, facts);
    return source;
  }

  /** Adds a file whose program text and cell map the caller built (the editor's notebook documents). */
  setSource(source: SourceFile): void {
    this.ws.addFile(source, this.cache.get(source.text));
  }

  /**
   * Adds a file whose facts were extracted elsewhere (the scanner's worker threads). The facts must be those of
   * `source.text`; they enter the cache so a later `setFile` of the same text does not parse again.
   */
  setFileFacts(source: SourceFile, facts: FileFacts): void {
    this.cache.put(facts);
    this.ws.addFile(source, facts);
  }

  setDataFile(path: string, text: string): void {
    this.ws.addDataFile(path, text);
  }

  removeFile(path: string): void {
    this.lowered.delete(path);
    this.ws.removeFile(path);
  }

  /** Runs every enabled rule on each of `paths` (default: all files); findings in any file, deduplicated. */
  analyze(paths?: readonly string[], views = new Views(this.ws)): Finding[] {
    const targets = paths ?? [...this.ws.files.keys()];
    const findings: Finding[] = [];
    const seen = new Set<string>();
    const levels = this.options.levels ?? {};
    const thresholds = this.thresholds;
    for (const path of targets) {
      const file = this.ws.get(path);
      if (!file) continue;
      for (const rule of this.rules) {
        const setting = levels[rule.meta.id];
        if (setting === 'off') continue;
        const found: Finding[] = [];
        const ctx: RuleContext<Record<string, string>> = {
          file,
          path,
          ws: this.ws,
          views,
          thresholds,
          textOf: (p) => this.ws.get(p)?.source.text ?? '',
          edit: (p, start, end, newText) => ({ path: p, start, end, newText }),
          report: (r) => {
            const template = rule.meta.messages[r.messageId];
            found.push({
              rule: rule.meta.id,
              level: (setting as Level | undefined) ?? r.level ?? rule.meta.level,
              path: r.path,
              span: r.span,
              message: formatMessage(template, r.data as Record<string, string | number>),
              messageId: r.messageId,
              related: r.related ?? [],
              fixes: r.fixes ?? [],
              tags: r.tags ?? [],
            });
          },
        };
        try {
          rule.check(ctx);
        } catch (err) {
          found.length = 0;
          found.push(internalFinding(path, rule.meta.id, err));
        }
        for (const f of found) {
          const key = `${f.rule}\0${f.path}\0${f.span.start}\0${f.span.end}\0${f.messageId}`;
          if (seen.has(key)) continue;
          seen.add(key);
          findings.push(f);
        }
      }
    }
    return this.filterAllowed(findings).sort(compareFindings);
  }

  private filterAllowed(findings: Finding[]): Finding[] {
    const byPath = new Map<string, Allowance[]>();
    return findings.filter((f) => {
      if (f.rule === INTERNAL_RULE) return true;
      let a = byPath.get(f.path);
      if (!a) {
        a = parseAllowances(this.ws.get(f.path)?.facts.comments ?? []);
        byPath.set(f.path, a);
      }
      return !isAllowed(a, f.rule, f.span.line);
    });
  }
}

function internalFinding(path: string, rule: string, err: unknown): Finding {
  const span: Span = { start: 0, end: 0, line: 0, col: 0, endLine: 0, endCol: 0 };
  const msg = err instanceof Error ? err.message : String(err);
  return {
    rule: INTERNAL_RULE,
    level: 'error',
    path,
    span,
    message: `Rule ${rule} failed on this file and was skipped: ${msg}`,
    messageId: 'internal',
    related: [],
    fixes: [],
    tags: [],
  };
}

export function compareFindings(a: Finding, b: Finding): number {
  return a.path < b.path ? -1 : a.path > b.path ? 1 : a.span.start - b.span.start || (a.rule < b.rule ? -1 : a.rule > b.rule ? 1 : 0);
}
