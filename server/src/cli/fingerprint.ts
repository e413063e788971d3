// Fingerprints of findings that survive line shifts: rule + path + the flagged code and its neighbouring lines, normalised.
import { createHash } from 'node:crypto';
import type { Finding } from '../engine/types';

/** Lines of context on each side that take part in the hash: enough to tell copies apart, few enough to survive edits nearby. */
const NEIGHBOUR_LINES = 1;

function norm(line: string): string {
  return line.replace(/\s+/g, ' ').trim();
}

/** Non-blank lines around `line` (0-based), normalised; blank lines and indentation changes do not move the hash. */
function neighbourhood(lines: string[], line: number, endLine: number, n: number): string[] {
  const before: string[] = [];
  for (let i = line - 1; i >= 0 && before.length < n; i--) if (norm(lines[i])) before.unshift(norm(lines[i]));
  const after: string[] = [];
  for (let i = endLine + 1; i < lines.length && after.length < n; i++) if (norm(lines[i])) after.push(norm(lines[i]));
  return [...before, '\u241e', ...after];
}

/** The hash of the flagged code and its neighbourhood (no path, no rule, no line numbers). */
export function codeHash(text: string, f: Finding): string {
  const lines = text.split(/\r?\n/);
  const flagged = norm(text.slice(f.span.start, f.span.end)) || norm(lines[f.span.line] ?? '');
  const ctx = neighbourhood(lines, f.span.line, f.span.endLine, NEIGHBOUR_LINES);
  return createHash('sha256').update(`${f.messageId}\0${flagged}\0${ctx.join('\n')}`).digest('hex').slice(0, 32);
}

/**
 * Per-finding fingerprints: `hash(rule, path, code)` plus an ordinal among identical ones in the same file, so two
 * copies of one mistake stay distinct. `textOf` gives the analysed program text of a path.
 */
export function fingerprints(findings: readonly Finding[], textOf: (path: string) => string, pathOf: (path: string) => string): { code: string; full: string }[] {
  const count = new Map<string, number>();
  return findings.map((f) => {
    const code = codeHash(textOf(f.path), f);
    const base = createHash('sha256').update(`${f.rule}\0${pathOf(f.path)}\0${code}`).digest('hex').slice(0, 32);
    const k = count.get(base) ?? 0;
    count.set(base, k + 1);
    return { code, full: `${base}:${k + 1}` };
  });
}
