// One helper drives every rule table: valid cases must be quiet, invalid ones must match inline markers exactly,
// and a case with a fix must give the exact fixed text. Failures list missed and spurious findings separately.
import { expect } from 'vitest';
import { loadPythonParser, type PythonParser } from '../../server/src/engine/parser';
import { Engine } from '../../server/src/engine/engine';
import { applyFixesOnce, chooseFixes, fixUntilStable } from '../../server/src/engine/fix';
import type { Rule } from '../../server/src/engine/rule';
import type { EngineOptions, Finding, FixKind } from '../../server/src/engine/types';

let parserPromise: Promise<PythonParser> | undefined;
export function parser(): Promise<PythonParser> {
  parserPromise ??= loadPythonParser();
  return parserPromise;
}

/** Files of one case: `main.py` is the file checked unless `check` names others. */
export type Files = Record<string, string>;

export interface ValidCase {
  name: string;
  code: string | Files;
  options?: EngineOptions;
}

export interface InvalidCase extends ValidCase {
  /**
   * Expected findings. With inline markers (`#   ^^^^ rule-id[:messageId]` on the line after the flagged code, carets
   * under the flagged columns of that line) this may be omitted; otherwise list them.
   */
  messageId?: string;
  /** Exact text of `main.py` (or the file that holds the fix) after applying fixes of this kind until stable. */
  output?: string;
  fixKind?: FixKind;
  /** Extra assertions on the findings (e.g. message text, related locations). */
  verify?: (findings: Finding[]) => void;
}

interface Marker {
  path: string;
  line: number;
  col: number;
  endCol: number;
  rule: string;
  messageId?: string;
}

const MARKER = /^(\s*)#(\s*)(\^+)\s+([a-z0-9-]+)(?::([A-Za-z0-9_-]+))?\s*$/;

/** Strips marker lines; returns the clean text and the markers (0-based lines of the clean text). */
export function parseMarkers(path: string, text: string): { text: string; markers: Marker[] } {
  const out: string[] = [];
  const markers: Marker[] = [];
  for (const line of text.split('\n')) {
    const m = MARKER.exec(line);
    if (m && out.length) {
      const col = line.indexOf('^');
      markers.push({ path, line: out.length - 1, col, endCol: col + m[3].length, rule: m[4], messageId: m[5] });
      continue;
    }
    out.push(line);
  }
  return { text: out.join('\n'), markers };
}

export async function engineFor(rule: Rule | readonly Rule[], files: Files, options?: EngineOptions): Promise<Engine> {
  const e = new Engine(await parser(), Array.isArray(rule) ? rule : [rule as Rule]);
  if (options) e.configure(options);
  for (const [p, t] of Object.entries(files)) {
    if (/\.(ya?ml|json|toml)$/.test(p)) e.setDataFile(p, t);
    else e.setFile(p, t);
  }
  return e;
}

function describeFinding(f: Finding): string {
  return `${f.path}:${f.span.line + 1}:${f.span.col + 1}-${f.span.endLine + 1}:${f.span.endCol + 1} ${f.rule}:${f.messageId} ${f.message}`;
}

function describeMarker(m: Marker): string {
  return `${m.path}:${m.line + 1}:${m.col + 1}-${m.line + 1}:${m.endCol + 1} ${m.rule}${m.messageId ? `:${m.messageId}` : ''}`;
}

function matches(f: Finding, m: Marker): boolean {
  if (f.path !== m.path || f.rule !== m.rule || f.span.line !== m.line || f.span.col !== m.col) return false;
  if (m.messageId && f.messageId !== m.messageId) return false;
  // a span that runs onto later lines is marked up to the end of its first line
  return f.span.endLine === m.line ? f.span.endCol === m.endCol : true;
}

function normalise(code: string | Files): Files {
  return typeof code === 'string' ? { 'main.py': code } : code;
}

export async function runRuleTable(rule: Rule, table: { valid: ValidCase[]; invalid: InvalidCase[] }): Promise<void> {
  const names = [...table.valid, ...table.invalid].map((c) => c.name);
  const dup = names.find((n, i) => names.indexOf(n) !== i);
  if (dup) throw new Error(`duplicate case name: ${dup}`);
  const codes = [...table.valid, ...table.invalid].map((c) => JSON.stringify(c.code));
  const dupCode = codes.findIndex((c, i) => codes.indexOf(c) !== i);
  if (dupCode >= 0) throw new Error(`duplicate case code: ${names[dupCode]}`);
  if (table.valid.length < 3) throw new Error(`${rule.meta.id}: at least three quiet cases are required`);
  for (const c of table.valid) await checkValid(rule, c);
  for (const c of table.invalid) await checkInvalid(rule, c);
}

export async function checkValid(rule: Rule, c: ValidCase): Promise<void> {
  const files = normalise(c.code);
  const clean: Files = {};
  for (const [p, t] of Object.entries(files)) clean[p] = parseMarkers(p, t).text;
  const e = await engineFor(rule, clean, c.options);
  const found = e.analyze().filter((f) => f.rule === rule.meta.id || f.rule === 'internal-error');
  expect(found.map(describeFinding), `quiet case "${c.name}" produced findings`).toEqual([]);
}

export async function checkInvalid(rule: Rule, c: InvalidCase): Promise<Finding[]> {
  const files = normalise(c.code);
  const clean: Files = {};
  const markers: Marker[] = [];
  for (const [p, t] of Object.entries(files)) {
    const r = parseMarkers(p, t);
    clean[p] = r.text;
    markers.push(...r.markers);
  }
  if (!markers.length) throw new Error(`invalid case "${c.name}" has no markers`);
  for (const m of markers) {
    if (m.rule !== rule.meta.id) throw new Error(`case "${c.name}": marker names ${m.rule}, not ${rule.meta.id}`);
    if (m.messageId && !(m.messageId in rule.meta.messages)) throw new Error(`case "${c.name}": unknown message id ${m.messageId}`);
  }
  if (c.messageId && !(c.messageId in rule.meta.messages)) throw new Error(`case "${c.name}": unknown message id ${c.messageId}`);
  const e = await engineFor(rule, clean, c.options);
  const found = e.analyze().filter((f) => f.rule === rule.meta.id || f.rule === 'internal-error');
  const missed = markers.filter((m) => !found.some((f) => matches(f, m)));
  const spurious = found.filter((f) => !markers.some((m) => matches(f, m)));
  expect({ missed: missed.map(describeMarker), spurious: spurious.map(describeFinding) }, `case "${c.name}"`).toEqual({ missed: [], spurious: [] });
  if (c.messageId) for (const f of found) expect(f.messageId, `case "${c.name}"`).toBe(c.messageId);
  c.verify?.(found);
  if (c.output !== undefined) {
    const kind = c.fixKind ?? 'safe';
    const target = found.find((f) => f.fixes.length)?.fixes[0]?.edits[0]?.path ?? 'main.py';
    const p = await parser();
    const res = fixUntilStable(p, target, clean[target], kind, (text) => {
      const files2 = { ...clean, [target]: text };
      const e2 = new Engine(p, [rule]);
      if (c.options) e2.configure(c.options);
      for (const [fp, t] of Object.entries(files2)) {
        if (/\.(ya?ml|json|toml)$/.test(fp)) e2.setDataFile(fp, t);
        else e2.setFile(fp, t);
      }
      return e2.analyze();
    });
    expect(res.text, `fixed output of "${c.name}"`).toBe(c.output);
  } else {
    const fixable = chooseFixes(found, 'main.py', c.fixKind ?? 'safe');
    expect(fixable.map((x) => x.fix.title), `case "${c.name}" has a fix but no expected output`).toEqual([]);
  }
  return found;
}

export { applyFixesOnce };
