// The one fix applier: picks non-overlapping edits, applies them in bounded passes and refuses any result that
// adds a syntax error. The editor's code actions and `regwise scan --fix` both go through here.
import type { PythonParser } from './parser';
import type { Finding, Fix, FixKind, TextEdit } from './types';
import { lowerModule } from './lower';

export const MAX_FIX_PASSES = 10;

/** Applies edits (against one text) that do not overlap; returns undefined if any two overlap. */
export function applyEdits(text: string, edits: readonly TextEdit[]): string | undefined {
  const sorted = [...edits].sort((a, b) => a.start - b.start || a.end - b.end);
  for (let i = 1; i < sorted.length; i++) if (sorted[i].start < sorted[i - 1].end) return undefined;
  let out = '';
  let at = 0;
  for (const e of sorted) {
    out += text.slice(at, e.start) + e.newText;
    at = e.end;
  }
  return out + text.slice(at);
}

export function syntaxErrorCount(parser: PythonParser, text: string): number {
  const tree = parser.parse(text);
  try {
    return lowerModule(tree).syntaxErrors.length;
  } finally {
    tree.delete();
  }
}

export interface FixChoice {
  finding: Finding;
  fix: Fix;
}

/** The fixes of `findings` for `path` that a request allows, one per finding, the safe one preferred. */
export function chooseFixes(findings: readonly Finding[], path: string, allowed: FixKind): FixChoice[] {
  const out: FixChoice[] = [];
  for (const f of findings) {
    const fixes = f.fixes.filter((x) => (allowed === 'suggested' || x.kind === 'safe') && x.edits.length && x.edits.every((e) => e.path === path));
    const best = fixes.find((x) => x.kind === 'safe') ?? fixes[0];
    if (best) out.push({ finding: f, fix: best });
  }
  return out;
}

/** One pass: applies every chosen fix whose edits overlap no earlier one; refuses the result if it breaks syntax. */
export function applyFixesOnce(parser: PythonParser, text: string, choices: readonly FixChoice[]): { text: string; applied: FixChoice[] } {
  const taken: TextEdit[] = [];
  const applied: FixChoice[] = [];
  const overlaps = (e: TextEdit) => taken.some((t) => e.start < t.end && t.start < e.end || (e.start === e.end && t.start === t.end && e.start === t.start));
  for (const c of choices) {
    if (c.fix.edits.some(overlaps)) continue;
    taken.push(...c.fix.edits);
    applied.push(c);
  }
  if (!applied.length) return { text, applied };
  const next = applyEdits(text, taken);
  if (next === undefined) return { text, applied: [] };
  if (syntaxErrorCount(parser, next) > syntaxErrorCount(parser, text)) {
    // one of them breaks the file: try them one at a time so the good ones still land
    let cur = text;
    const ok: FixChoice[] = [];
    for (const c of applied) {
      const t = applyEdits(cur, c.fix.edits);
      if (t !== undefined && syntaxErrorCount(parser, t) <= syntaxErrorCount(parser, cur)) {
        cur = t;
        ok.push(c);
        break; // offsets of the rest are stale now; the next pass re-analyses
      }
    }
    return { text: cur, applied: ok };
  }
  return { text: next, applied };
}

/**
 * Fixes a file until no fix applies or the pass bound is hit. `analyse(text)` re-runs the rules on the new text
 * so later passes see fresh offsets.
 */
export function fixUntilStable(
  parser: PythonParser,
  path: string,
  text: string,
  allowed: FixKind,
  analyse: (text: string) => readonly Finding[],
): { text: string; applied: FixChoice[]; passes: number } {
  let cur = text;
  const all: FixChoice[] = [];
  let passes = 0;
  for (; passes < MAX_FIX_PASSES; passes++) {
    const choices = chooseFixes(analyse(cur).filter((f) => f.path === path), path, allowed);
    if (!choices.length) break;
    const { text: next, applied } = applyFixesOnce(parser, cur, choices);
    if (!applied.length || next === cur) break;
    all.push(...applied);
    cur = next;
  }
  return { text: cur, applied: all, passes };
}
